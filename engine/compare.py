"""Measure every method that can serve a target, now, on this machine: set-up
time, throughput and the counted costs per draw, side by side.

Throughput is the median of a few timed batches after one warm-up batch (the
usual practice for micro-benchmarks); counters come from the samplers themselves.
"""
from __future__ import annotations

import statistics
import time
from dataclasses import asdict, dataclass

import numpy as np

from .errors import MethodNotApplicable, ModelError
from .methods import METHODS
from .sampling import fit
from .target import Target


@dataclass
class MethodResult:
    method: str
    applicable: bool
    reason: str
    variant: str = ""
    setup_ms: float | None = None
    draws_per_second: float | None = None
    acceptance_rate: float | None = None
    uniforms_per_sample: float | None = None
    density_evals_per_sample: float | None = None
    squeeze_rate: float | None = None
    table_bytes: int | None = None
    u_error: float | None = None

    def to_dict(self) -> dict:
        return asdict(self)


def compare_methods(target: Target, n: int = 200_000, rng=20261201, tolerance: float = 1e-10,
                    repeats: int = 3, methods=None) -> list[MethodResult]:
    """One row per method: measured if it applies, else the reason it does not."""
    if not isinstance(target, Target):
        raise ModelError("target", "must be an engine.Target")
    if n < 1000:
        raise ModelError("n", f"use at least 1000 draws to time a method, got {n}")
    rows = []
    for name in (methods or METHODS):
        try:
            sampler = fit(target, name, tolerance)
        except MethodNotApplicable as err:
            rows.append(MethodResult(name, False, err.reason))
            continue
        gen = np.random.default_rng(rng)
        batch = max(n // repeats, 1000)
        sampler.sample(min(batch, 20_000), gen)   # warm-up: caches, lazy tables
        sampler.reset_counters()
        times = []
        for _ in range(repeats):
            start = time.perf_counter()
            sampler.sample(batch, gen)
            times.append(time.perf_counter() - start)
        s = sampler.stats
        rows.append(MethodResult(
            method=name, applicable=True, reason=sampler.reason, variant=str(s.get("variant", "")),
            setup_ms=1e3 * s["setup_seconds"], draws_per_second=batch / statistics.median(times),
            acceptance_rate=s.get("acceptance_rate"), uniforms_per_sample=s.get("uniforms_per_sample"),
            density_evals_per_sample=s.get("density_evals_per_sample"), squeeze_rate=s.get("squeeze_rate"),
            table_bytes=s.get("table_bytes"), u_error=s.get("u_error")))
    return rows


def format_table(rows: list[MethodResult]) -> str:
    """A plain-text table for the terminal."""
    head = (f"{'method':18s} {'set-up ms':>10s} {'draws/s':>11s} {'accept':>7s} {'U/draw':>7s} "
            f"{'f/draw':>7s} {'squeeze':>8s} {'table B':>9s} {'u-error':>9s}")
    lines = [head, "-" * len(head)]

    def fmt(v, spec):
        width = int("".join(ch for ch in spec.split(".")[0] if ch.isdigit()) or 0)
        return format(v, spec) if v is not None else "-".rjust(width)

    for r in rows:
        if not r.applicable:
            lines.append(f"{r.method:18s} not applicable: {r.reason}")
            continue
        lines.append(f"{r.method:18s} {fmt(r.setup_ms, '10.2f')} {fmt(r.draws_per_second, '11.3g')} "
                     f"{fmt(r.acceptance_rate, '7.3f')} {fmt(r.uniforms_per_sample, '7.3f')} "
                     f"{fmt(r.density_evals_per_sample, '7.3f')} {fmt(r.squeeze_rate, '8.3f')} "
                     f"{fmt(r.table_bytes, '9d')} {fmt(r.u_error, '9.2g')}")
    return "\n".join(lines)
