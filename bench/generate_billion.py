"""Benchmark: draw 10^9 lifetimes of a scenario on a local 2-worker Dask cluster and report
the rate (draws/s) and the peak memory of this process and of each worker.

Streams as in engine.generate (numpy SeedSequence spawn keys, NEP 19). By default the draws
are reduced on the workers (mean, max and a 200-bin histogram) and never stored; with --out
they are written as .npy shards (8 bytes per draw: 8 GB for 10^9).

    .venv/bin/python bench/generate_billion.py [--scenario gearbox-wearout] [-n 1e9]
                                               [--chunk 1e7] [--workers 2] [--out DIR]
"""
from __future__ import annotations

import argparse
import os
import resource
import shutil
import sys
import tempfile
import time
from pathlib import Path


def _peak_rss_mib() -> float:
    # ru_maxrss is in KiB on Linux.
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def _cpu_seconds() -> float:
    return time.process_time()


def _far_point(drawable, sc) -> float:
    """The age that 1 in 10^4 lifetimes outlives: the model's isf, or R(t) = 1e-4 for a system."""
    if not hasattr(drawable, "reliability"):
        return float(sc.target().isf(1e-4))
    from scipy.optimize import brentq
    hi = 1.0
    while drawable.reliability(hi) > 1e-4:
        hi *= 2.0
    return float(brentq(lambda t: drawable.reliability(t) - 1e-4, 0.0, hi, rtol=1e-10))


def drawable_of(sc):
    """What a scenario draws: its system, or its model fitted with its own method."""
    from lifedraw.engine.sampling import fit
    from lifedraw.engine.systems import system_from_scenario
    return system_from_scenario(sc) if sc.system else fit(sc.target(), sc.method, sc.tolerance)


def reduce_on_workers(x, drawable, sc):
    """Mean, max and a 200-bin histogram of the lazy draws ``x``, computed where they are drawn;
    returns one line comparing them with the model's exact mean and 99.99 % point."""
    import dask
    import dask.array as da
    import numpy as np

    top = _far_point(drawable, sc)
    mean, biggest, (counts, _edges) = dask.compute(x.mean(), x.max(), da.histogram(x, bins=200, range=(0.0, top)))
    exact_mean = drawable.mean() if hasattr(drawable, "reliability") else drawable.target.mean()
    return (f"mean {mean:.6g} {sc.time_unit} (exact {exact_mean:.6g}), max {biggest:.6g}, "
            f"{int(np.sum(counts)):,} draws below the exact 99.99% point {top:.6g}")


def _timed(fn) -> float:
    start = time.perf_counter()
    fn()
    return time.perf_counter() - start


def main(argv=None) -> int:
    from lifedraw.cli.numbers import whole_number
    from lifedraw.engine.generate import dask_client, generate
    from lifedraw.engine.scenarios import load_scenario

    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--scenario", default="gearbox-wearout")
    p.add_argument("-n", type=whole_number, default=10**9)
    p.add_argument("--chunk", type=whole_number, default=10**7)
    p.add_argument("--workers", type=int, default=2, help="local worker processes (0: threads in this process)")
    p.add_argument("--seed", type=int, default=1)
    p.add_argument("--out", default=None, help="write shards here (a temp folder if 'tmp'), else reduce only")
    args = p.parse_args(argv)

    sc = load_scenario(args.scenario)
    drawable = drawable_of(sc)
    what = "system" if sc.system else getattr(drawable, "method", "")
    where = f"{args.workers} local worker processes" if args.workers else "threads in this process"
    print(f"{sc.title}\n{args.n:.3g} draws ({what}) in chunks of {args.chunk:.3g} on {where}, "
          f"seed {args.seed}", flush=True)

    # Baseline: the same sampler in this process alone, no Dask, best of 3 chunks.
    best = min(_timed(lambda i=i: drawable.sample(args.chunk, i)) for i in range(3))
    print(f"baseline, one process without Dask: {args.chunk / best / 1e6:.1f} M draws/s", flush=True)

    with dask_client(workers=args.workers or None) as client:
        if client is not None:
            client.run(lambda: None)                   # workers up before the clock starts
        cpu_before = client.run(_cpu_seconds) if client is not None else {"local": time.process_time()}
        start = time.perf_counter()
        if args.out:
            folder = Path(tempfile.mkdtemp(prefix="lifedraw-bench-")) if args.out == "tmp" else Path(args.out)
            try:
                x = generate(drawable, args.n, chunk=args.chunk, seed=args.seed, client=client, out=folder / "draws")
                seconds = time.perf_counter() - start
                mode = f"written as {x.numblocks[0]} shards to {folder / 'draws'}"
            finally:
                if args.out == "tmp":
                    shutil.rmtree(folder, ignore_errors=True)
            figures = ""
        else:
            x = generate(drawable, args.n, chunk=args.chunk, seed=args.seed, client=client)
            figures = reduce_on_workers(x, drawable, sc)
            seconds = time.perf_counter() - start
            mode = "reduced on the workers (mean, max, histogram), not stored"
        if client is not None:
            worker_peaks = client.run(_peak_rss_mib)
            cpu = sum(client.run(_cpu_seconds).values()) - sum(cpu_before.values())
        else:
            worker_peaks, cpu = {}, time.process_time() - cpu_before["local"]

    print(f"{args.n:,} draws {mode}")
    if figures:
        print(figures)
    print(f"time {seconds:.1f} s, rate {args.n / seconds / 1e6:.1f} M draws/s")
    # Other programs on the machine slow the wall clock; the workers' own CPU time does not.
    cores = args.workers or os.cpu_count() or 1
    print(f"CPU {cpu:.1f} s: {args.n / cpu / 1e6:.1f} M draws per CPU-second "
          f"({cores * args.n / cpu / 1e6:.1f} M draws/s if {cores} cores were free)")
    print(f"peak memory: this process {_peak_rss_mib():.0f} MiB"
          + ("; workers " + ", ".join(f"{v:.0f} MiB" for v in worker_peaks.values()) if worker_peaks else ""))
    return 0


if __name__ == "__main__":
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
    sys.exit(main())
