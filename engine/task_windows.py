"""Run many independent chunk tasks with a sliding window: at most a few in flight at once, so
memory stays bounded and a cluster's graph stays small however many chunks there are.

Shared by ``generate`` (shards) and ``simulate_fleet`` (unit chunks); each chunk's numbers come from
its own SeedSequence spawn key, so the order in which tasks finish never changes a result.
"""
from __future__ import annotations

import itertools
import uuid
from concurrent.futures import FIRST_COMPLETED, ThreadPoolExecutor, wait
from typing import Callable, Iterable


def run_on_threads(function: Callable, shipped, tasks: Iterable[tuple], args_of: Callable[[tuple], tuple],
                   finished: Callable, threads: int, name: str) -> None:
    """``function(shipped, *args_of(task))`` for every task on ``threads`` local threads, at most
    ``threads`` at once; ``finished(result)`` is called as each completes."""
    pending_tasks = iter(tasks)
    with ThreadPoolExecutor(max_workers=threads, thread_name_prefix=f"lifedraw-{name}") as pool:
        def submit(task):
            return pool.submit(function, shipped, *args_of(task))
        pending = {submit(t) for t in itertools.islice(pending_tasks, threads)}
        try:
            while pending:
                done, pending = wait(pending, return_when=FIRST_COMPLETED)
                for future in done:
                    finished(future.result())
                    nxt = next(pending_tasks, None)
                    if nxt is not None:
                        pending.add(submit(nxt))
        except BaseException:
            for future in pending:
                future.cancel()
            raise


def run_on_cluster(client, function: Callable, shipped, tasks: Iterable[tuple], args_of: Callable[[tuple], tuple],
                   finished: Callable, threads: int, name: str) -> None:
    """The same on a Dask cluster: ``shipped`` is scattered once to every worker, and about two tasks
    per worker thread are submitted ahead of the results."""
    from distributed import as_completed

    source = client.scatter(shipped, broadcast=True, hash=False)
    window = max(2 * threads, 2)
    pending_tasks = iter(tasks)

    def submit(task):
        return client.submit(function, source, *args_of(task), pure=False,
                             key=f"lifedraw-{name}-{task[0]}-{uuid.uuid4().hex[:8]}")

    running = as_completed([submit(t) for t in itertools.islice(pending_tasks, window)], loop=client.loop)
    try:
        for future in running:
            result = future.result()
            future.release()
            finished(result)
            nxt = next(pending_tasks, None)
            if nxt is not None:
                running.add(submit(nxt))
    except BaseException:
        client.cancel(list(running.futures))
        raise
    finally:
        source.release()
