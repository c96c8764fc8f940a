"""Fixtures shared by several test modules: a headless Debian chromium and a two-worker Dask cluster."""
from __future__ import annotations

import logging

import pytest

from served import CHROMIUM, CHROMIUM_ARGS


@pytest.fixture(scope="module")
def browser():
    """Debian's chromium, headless (a browser download is not possible everywhere)."""
    playwright_api = pytest.importorskip("playwright.sync_api")
    with playwright_api.sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, headless=True, args=CHROMIUM_ARGS)
        yield b
        b.close()


@pytest.fixture(scope="module")
def cluster_client():
    """A local cluster of two single-threaded worker processes on loopback."""
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(n_workers=2, processes=True, threads_per_worker=1, host="127.0.0.1",
                                       dashboard_address=None, silence_logs=logging.ERROR)
    client = distributed.Client(cluster, set_as_default=False)
    yield client
    client.close()
    cluster.close()
