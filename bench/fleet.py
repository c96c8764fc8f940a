"""`python -m bench.fleet`: a fleet of 1,000,000 units over about three mean lives, simulated on one
thread, against drawing the same number of lifetimes with ``sample`` (goal: at most 3x), and the
same fleet over 8 runs on 1 thread, 2 threads and a 2-worker local Dask cluster.

Medians of alternating repetitions in one process; prints markdown rows like bench/results.md.
Not part of `make test`.
"""
from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ[_var] = "1"

import argparse
import math
import statistics
import time

import dask
import numpy as np

import lifedraw
from lifedraw.engine.generate import dask_client

UNITS = 1_000_000
REPEATS = 5
GOAL = 3.0


def _models():
    gearbox = lifedraw.family("weibull", shape=2.6, scale=31000.0)
    formula = lifedraw.density_formula("t**(k - 1)*exp(-(t/s)**p)", (0, math.inf), dict(k=2.5, p=1.6, s=1.0))
    return [("Weibull family (closed-form inversion)", gearbox), ("generalised gamma formula (numerical inversion)",
                                                                   formula)]


def _fleet_vs_sample(name, target, units, repeats):
    sampler = lifedraw.fit(target, "inversion")
    horizon = 3.0 * target.mean()
    kwargs = dict(period=horizon / 12, runs=1, seed=1, exact=False)
    with dask.config.set(num_workers=1):
        result = lifedraw.simulate_fleet(sampler, units, horizon, **kwargs)
        lifetimes = units + int(result.replacements.sum())
        fleet_times, sample_times = [], []
        for i in range(repeats):
            start = time.perf_counter()
            lifedraw.simulate_fleet(sampler, units, horizon, **kwargs)
            fleet_times.append(time.perf_counter() - start)
            start = time.perf_counter()
            sampler.sample(lifetimes, i)
            sample_times.append(time.perf_counter() - start)
    fleet, draw = statistics.median(fleet_times), statistics.median(sample_times)
    ratio = fleet / draw
    print(f"| 8. fleet simulation vs sample | {name} | {fleet:.3g} | {draw:.3g} | {ratio:.3g} | <= {GOAL:g} (limit) | "
          f"{'met' if ratio <= GOAL else 'MISSED'} | seconds: {units:,} units over 3 mean lives, one run, one thread "
          f"({lifetimes:,} lifetimes) vs sample({lifetimes:,}) |", flush=True)


def _scale_out(target, units, runs):
    sampler = lifedraw.fit(target, "inversion")
    horizon = 3.0 * target.mean()
    kwargs = dict(period=horizon / 12, runs=runs, seed=1, exact=False)
    times = {}
    for label, threads in (("1 thread", 1), ("2 threads", 2)):
        with dask.config.set(num_workers=threads):
            lifedraw.simulate_fleet(sampler, units // 10, horizon, **kwargs)     # warm-up
            start = time.perf_counter()
            reference = lifedraw.simulate_fleet(sampler, units, horizon, **kwargs)
            times[label] = time.perf_counter() - start
    with dask_client(workers=2) as client:
        lifedraw.simulate_fleet(sampler, units // 10, horizon, client=client, **kwargs)
        start = time.perf_counter()
        on_cluster = lifedraw.simulate_fleet(sampler, units, horizon, client=client, **kwargs)
        times["2 Dask workers"] = time.perf_counter() - start
    same = np.array_equal(reference.failures, on_cluster.failures)
    base = times["1 thread"]
    for label, seconds in times.items():
        print(f"| 8b. fleet scale-out | {units:,} units x {runs} runs | {seconds:.3g} | {base:.3g} | "
              f"{seconds / base:.3g} | | | seconds on {label} vs 1 thread; same numbers on the cluster: {same} |",
              flush=True)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--units", type=int, default=UNITS)
    parser.add_argument("--repeats", type=int, default=REPEATS)
    parser.add_argument("--no-cluster", action="store_true")
    args = parser.parse_args(argv)
    print("| section | target | lifedraw | reference | ratio | goal | verdict | notes |\n|---|---|---|---|---|---|---|---|")
    for name, target in _models():
        _fleet_vs_sample(name, target, args.units, args.repeats)
    if not args.no_cluster:
        _scale_out(_models()[0][1], args.units, 8)


if __name__ == "__main__":
    main()
