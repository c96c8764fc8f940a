"""Scaling tables for `make bench`: draws per second against the size of one ``sample`` call,
and set-up time against the number of pieces a method builds.

Single thread; each size is timed by repeating the call until about 0.3 s have passed
(median of the repeats), into one preallocated buffer (numpy's ``out=`` convention), so
the first-touch cost of fresh memory does not hide the per-call overhead being measured.
"""
from __future__ import annotations

import statistics
import time

import numpy as np

import lifedraw
from lifedraw import engine

SIZES = (10**3, 10**4, 10**5, 10**6, 10**7, 10**8)
MIN_SECONDS = 0.3


def _gamma_formula():
    return lifedraw.density_formula("t**(k - 1)*exp(-(t/s)**p)", (0, float("inf")), dict(k=2.5, p=1.6, s=1.0))


def _samplers():
    """(label, sampler): every method on a target it serves."""
    gamma = _gamma_formula()
    edges = np.linspace(0.0, 5000.0, 41)
    counts = np.round(1000 * np.exp(-((edges[:-1] - 1500.0) / 1200.0) ** 2)) + 1
    bathtub = lifedraw.mixture([lifedraw.family("weibull", shape=0.6, scale=50.0),
                                lifedraw.family("weibull", shape=4.0, scale=500.0)], [0.3, 0.7])
    return [
        ("inversion (generalised gamma formula)", engine.fit(gamma, "inversion")),
        ("rejection (generalised gamma formula)", engine.fit(gamma, "rejection")),
        ("ratio-of-uniforms (generalised gamma formula)", engine.fit(gamma, "ratio-of-uniforms")),
        ("Leva normal (standard normal)", engine.fit(lifedraw.family("normal", mean=0, sd=1), "ratio-of-uniforms")),
        ("table (40 binned counts)", engine.fit(lifedraw.binned_counts(edges, counts), "table")),
        ("composition (Weibull bathtub mixture)", engine.fit(bathtub, "composition")),
    ]


def _rate(sampler, n, buffer, rng):
    out = buffer[:n]
    if n <= 10**6:
        sampler.sample(n, rng, out=out)             # warm-up (and compile, the first time)
    times = []
    spent = 0.0
    while spent < MIN_SECONDS or len(times) < 3:
        start = time.perf_counter()
        sampler.sample(n, rng, out=out)
        times.append(time.perf_counter() - start)
        spent += times[-1]
    return n / statistics.median(times)


def draws_against_size() -> list[str]:
    buffer = np.empty(max(SIZES))
    buffer[:] = 0.0                                 # touch every page once, before timing
    rng = np.random.default_rng(31)
    lines = ["## Scaling: draws per second against the size of one call", "",
             "One `sample(n, out=buffer)` call per timing, single thread, median of repeats over at least "
             f"{MIN_SECONDS} s per cell. Where the rate stops growing, the per-call overhead no longer matters.", "",
             "| method (target) | " + " | ".join(f"n = {n:.0e}" for n in SIZES) + " |",
             "|---|" + "---|" * len(SIZES)]
    for label, sampler in _samplers():
        rates = [_rate(sampler, n, buffer, rng) for n in SIZES]
        lines.append(f"| {label} | " + " | ".join(f"{r:.3g}" for r in rates) + " |")
    return lines


def _setup_ms(build, repeats=3):
    times, sampler = [], None
    for _ in range(repeats):
        start = time.perf_counter()
        sampler = build()
        times.append(time.perf_counter() - start)
    return statistics.median(times) * 1e3, sampler


def setup_against_pieces() -> list[str]:
    gamma = _gamma_formula()
    lines = ["## Scaling: set-up time against the number of pieces", "",
             "Median of 3 set-ups on a model built once (the model's own set-up is not included). Numerical "
             "inversion: pieces of the polynomial inverse, driven by the u-error tolerance. Rejection: construction "
             "points of the hat, driven by the point budget (acceptance goal 0.999): a budget below the initial points keeps those, and once the goal is met a larger budget adds none.", "",
             "| method | setting | pieces | set-up (ms) | ms per piece |", "|---|---|---|---|---|"]
    for tol in (1e-6, 1e-8, 1e-10, 1e-12):
        ms, s = _setup_ms(lambda: engine.fit(gamma, "inversion", tol))
        pieces = int(s.stats.get("pieces", 0))
        lines.append(f"| numerical inversion | u-error tolerance {tol:.0e} | {pieces} | {ms:.1f} | "
                     f"{ms / max(pieces, 1):.3f} |")
    for points in (16, 32, 64, 128, 256, 512):
        ms, s = _setup_ms(lambda: engine.fit(gamma, "rejection", acceptance=0.999, max_points=points,
                                             time_budget=60))
        pieces = int(s.stats["construction_points"])
        lines.append(f"| rejection | point budget {points} | {pieces} | {ms:.1f} | {ms / max(pieces, 1):.3f} |")
    return lines


def scaling_tables() -> list[str]:
    return draws_against_size() + [""] + setup_against_pieces()


if __name__ == "__main__":
    print("\n".join(scaling_tables()))
