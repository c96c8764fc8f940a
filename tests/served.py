"""A drawing board server in a subprocess on a free loopback port, for tests that talk to it over HTTP
or drive it from a browser. Shared by every browser and server test.

The port comes from binding port 0; another process can take it between that
probe and the server's own bind, so a start that fails is retried on a new port.
"""
from __future__ import annotations

import contextlib
import os
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = ["--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync"]


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@contextlib.contextmanager
def drawing_board_server(env: dict | None = None, serve_args: str = "", attempts: int = 3, log=None):
    """Run ``lifedraw.dashboard.app.serve(port=..., <serve_args>)``; yields the page's URL."""
    last = None
    for _ in range(attempts):
        port = free_port()
        code = f"from lifedraw.dashboard.app import serve; serve(port={port}{', ' + serve_args if serve_args else ''})"
        out = open(log, "ab") if log else subprocess.DEVNULL
        proc = subprocess.Popen([sys.executable, "-c", code], cwd=ROOT, env=dict(os.environ, **(env or {})),
                                stdout=out, stderr=out)
        url = f"http://127.0.0.1:{port}/"
        deadline = time.time() + 180     # a loaded machine starts slowly
        try:
            while proc.poll() is None and time.time() < deadline:
                try:      # the icon, not the page: a page request would build a session each time
                    urllib.request.urlopen(url + "favicon.ico", timeout=10).close()
                    break
                except (urllib.error.URLError, OSError):
                    time.sleep(0.3)
            if proc.poll() is None and time.time() < deadline:
                yield url
                return
            last = f"the server on port {port} did not start (exit code {proc.poll()})"
        finally:
            proc.terminate()
            try:
                proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                proc.kill()
            if log:
                out.close()
    raise RuntimeError(last)


def offline_page(browser, url: str | None = None, allow: tuple = ("http://127.0.0.1", "ws://127.0.0.1")):
    """A new page whose requests leave only for ``allow``; returns (page, dialogs, outside, errors)."""
    page = browser.new_page(viewport={"width": 1360, "height": 1000})
    dialogs, outside, errors = [], [], []

    def route(r):
        if r.request.url.startswith((*allow, "data:", "blob:")):
            r.continue_()
        else:
            outside.append(r.request.url)
            r.abort()

    def dialog(d):
        dialogs.append(d.message)
        d.dismiss()

    page.on("dialog", dialog)
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.route("**/*", route)
    if url:
        page.goto(url)
    return page, dialogs, outside, errors
