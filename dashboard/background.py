"""Long computations of the page (uploads, reports, method comparisons) in worker threads, so the
server's event loop keeps answering every other session meanwhile (asyncio ``run_in_executor``).

A small, bounded pool: two workers on a 2-core machine, more work waits its turn
instead of many threads fighting over the interpreter lock that the event loop
needs too. Work handed over here must not touch the page or the session's
``param`` state; its result is adopted back on the loop by the caller.
"""
from __future__ import annotations

import asyncio
import functools
import logging
import os
from concurrent.futures import ThreadPoolExecutor

log = logging.getLogger("lifedraw.dashboard")

WORKERS = max(1, min(2, os.cpu_count() or 1))
_POOL = ThreadPoolExecutor(max_workers=WORKERS, thread_name_prefix="lifedraw-work")


def outcome(fn, *args, **kwargs):
    """``fn(*args, **kwargs)``, or the exception it raised (handed back, to be shown by the caller)."""
    try:
        return fn(*args, **kwargs)
    except Exception as err:
        return err


async def off_loop(fn, *args, **kwargs):
    """Run ``fn`` in a worker thread and wait for it without blocking the event loop; returns its result
    or the exception it raised."""
    loop = asyncio.get_running_loop()
    return await loop.run_in_executor(_POOL, functools.partial(outcome, fn, *args, **kwargs))
