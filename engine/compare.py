"""Measure every method that can serve a target, now, on this machine, and decide which one to
use for a planned number of draws: total cost = set-up + draws x cost per draw, at the tolerance.

Timing follows the usual practice for micro-benchmarks: one warm-up batch that is not
timed (caches, lazily built tables), then several timed repeats whose median is the
figure and whose range (fastest to slowest) is the spread shown beside it. Two methods
whose ranges overlap are called "within the noise" rather than ranked.
"""
from __future__ import annotations

import math
import statistics
import time
from dataclasses import asdict, dataclass, field

import numpy as np

from .errors import MethodNotApplicable, ModelError
from .methods import METHODS
from .sampling import fit
from .target import Target

#: Set-up is timed again (up to SETUP_REPEATS fits) only while the fits take less than this in all.
SETUP_BUDGET_S = 0.5
SETUP_REPEATS = 3


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
    #: cost of one draw in seconds: median of the timed repeats, and the fastest and slowest repeat
    seconds_per_draw: float | None = None
    seconds_per_draw_low: float | None = None
    seconds_per_draw_high: float | None = None
    repeats: int = 0
    batch: int = 0

    def to_dict(self) -> dict:
        return asdict(self)


def compare_methods(target: Target, n: int = 200_000, rng=20261201, tolerance: float = 1e-10,
                    repeats: int = 5, methods=None) -> list[MethodResult]:
    """One row per method: measured if it applies, else the reason it does not.

    ``n`` draws per method are split into ``repeats`` timed batches after one untimed
    warm-up batch; set-up is the fastest of up to three fits (the first fit also pays
    for imports and compilation, which a user pays once per process, not per model).
    """
    if not isinstance(target, Target):
        raise ModelError("target", "must be an engine.Target")
    if n < 1000:
        raise ModelError("n", f"use at least 1000 draws to time a method, got {n}")
    repeats = int(repeats)
    if not 3 <= repeats <= 50:
        raise ModelError("repeats", f"time each method 3 to 50 times, got {repeats}")
    rows = []
    for name in (methods or METHODS):
        try:
            sampler = fit(target, name, tolerance)
        except MethodNotApplicable as err:
            rows.append(MethodResult(name, False, err.reason))
            continue
        setups = [sampler.stats["setup_seconds"]]
        while len(setups) < SETUP_REPEATS and sum(setups) < SETUP_BUDGET_S:
            setups.append(fit(target, name, tolerance).stats["setup_seconds"])
        gen = np.random.default_rng(rng)
        batch = max(n // repeats, 1000)
        sampler.sample(min(batch, 20_000), gen)   # warm-up, not timed
        sampler.reset_counters()
        per_draw = []
        for _ in range(repeats):
            start = time.perf_counter()
            sampler.sample(batch, gen)
            per_draw.append((time.perf_counter() - start) / batch)
        median = statistics.median(per_draw)
        s = sampler.stats
        rows.append(MethodResult(
            method=name, applicable=True, reason=sampler.reason, variant=str(s.get("variant", "")),
            setup_ms=1e3 * min(setups), draws_per_second=1.0 / median,
            acceptance_rate=s.get("acceptance_rate"), uniforms_per_sample=s.get("uniforms_per_sample"),
            density_evals_per_sample=s.get("density_evals_per_sample"), squeeze_rate=s.get("squeeze_rate"),
            table_bytes=s.get("table_bytes"), u_error=s.get("u_error"),
            seconds_per_draw=median, seconds_per_draw_low=min(per_draw), seconds_per_draw_high=max(per_draw),
            repeats=repeats, batch=batch))
    return rows


# ---- the decision ---------------------------------------------------------------------------------

def _get(row, key):
    return row.get(key) if isinstance(row, dict) else getattr(row, key)


def total_seconds(row, draws: float) -> float:
    """Set-up plus ``draws`` times the median cost per draw."""
    return 1e-3 * float(_get(row, "setup_ms")) + float(draws) * float(_get(row, "seconds_per_draw"))


def crossover(a, b) -> float | None:
    """The number of draws at which ``a`` and ``b`` cost the same in all, or None if the
    lines set-up + n x per-draw never cross at a positive n."""
    da = float(_get(a, "seconds_per_draw")) - float(_get(b, "seconds_per_draw"))
    ds = 1e-3 * (float(_get(b, "setup_ms")) - float(_get(a, "setup_ms")))
    if da == 0:
        return None
    n = ds / da
    return n if n > 0 else None


def within_noise(a, b) -> bool:
    """True when the per-draw timing ranges (fastest to slowest repeat) of a and b overlap."""
    return (float(_get(a, "seconds_per_draw_low")) <= float(_get(b, "seconds_per_draw_high"))
            and float(_get(b, "seconds_per_draw_low")) <= float(_get(a, "seconds_per_draw_high")))


def reaches(row, tolerance: float) -> bool:
    """Does the method reach the u-error tolerance? Methods without a u-error (rejection,
    ratio-of-uniforms, closed-form inversion) are exact up to rounding."""
    err = _get(row, "u_error")
    return err is None or not math.isfinite(float(err)) or float(err) <= float(tolerance) * (1 + 1e-9)


@dataclass
class Decision:
    """Which method to use for ``draws`` draws, and the one sentence that says why."""
    draws: int
    winner: str | None
    sentence: str
    #: (draws, method cheaper overall on that side, "below" | "above")
    crossovers: list = field(default_factory=list)
    #: methods whose per-draw cost is within the noise of the winner's
    ties: list = field(default_factory=list)
    #: methods left out because they miss the tolerance
    too_coarse: list = field(default_factory=list)


def _duration(seconds: float) -> str:
    if seconds >= 1:
        return f"{seconds:.3g} s"
    if seconds >= 1e-3:
        return f"{1e3 * seconds:.3g} ms"
    if seconds >= 1e-6:
        return f"{1e6 * seconds:.3g} µs"
    return f"{1e9 * seconds:.3g} ns"


def count_words(n: float) -> str:
    """1,000 / 40,000 / 2.5 M / 1.2 G draws: M for millions, G for billions."""
    n = float(n)
    if n >= 1e9:
        return f"{n / 1e9:.3g} G"
    if n >= 1e6:
        return f"{n / 1e6:.3g} M"
    return f"{n:,.0f}"


def decide(rows, draws: int, tolerance: float) -> Decision:
    """Name the method with the smallest total cost for ``draws`` draws among those that reach
    ``tolerance``, where the cheapest method changes below and above it, and near-ties."""
    draws = int(draws)
    if draws < 1:
        raise ModelError("draws", f"plan at least one draw, got {draws}")
    measured = [r for r in rows if _get(r, "applicable") and _get(r, "seconds_per_draw") is not None]
    usable = [r for r in measured if reaches(r, tolerance)]
    coarse = [_get(r, "method") for r in measured if not reaches(r, tolerance)]
    if not usable:
        why = "no method was measured" if not measured else f"no method reaches the u-error tolerance {tolerance:g}"
        return Decision(draws, None, f"Nothing to recommend: {why}.", too_coarse=coarse)
    best = min(usable, key=lambda r: total_seconds(r, draws))
    name = _get(best, "method")
    crossings = []
    # Going down in draws the set-up weighs more; going up the cost per draw does.
    for side in ("below", "above"):
        points = []
        for r in usable:
            if r is best:
                continue
            n = crossover(best, r)
            if n is None:
                continue
            if side == "below" and n < draws and total_seconds(r, n / 2) < total_seconds(best, n / 2):
                points.append((n, _get(r, "method")))
            if side == "above" and n > draws and total_seconds(r, 2 * n) < total_seconds(best, 2 * n):
                points.append((n, _get(r, "method")))
        if points:
            n, other = max(points) if side == "below" else min(points)
            crossings.append((int(math.ceil(n)), other, side))
    ties = [_get(r, "method") for r in usable if r is not best and within_noise(best, r)]
    cost = total_seconds(best, draws)
    memory = _get(best, "table_bytes")
    sentence = (f"For {count_words(draws)} draws at u-error ≤ {tolerance:g}, use {name}: "
                f"{_duration(cost)} in all ({_duration(1e-3 * float(_get(best, 'setup_ms')))} set-up + "
                f"{_duration(float(_get(best, 'seconds_per_draw')))} per draw)")
    if memory:
        sentence += f", {_memory(memory)} of tables"
    sentence += "."
    for n, other, side in crossings:
        if side == "below":
            sentence += f" Below {count_words(n)} draws, {other} is cheaper overall."
        else:
            sentence += f" Above {count_words(n)} draws, {other} becomes cheaper overall."
    if ties:
        sentence += (f" Per draw, {name} and {', '.join(ties)} are within the measurement noise "
                     f"(their timing ranges overlap).")
    if coarse:
        sentence += f" Not considered, too coarse for the tolerance: {', '.join(coarse)}."
    return Decision(draws, name, sentence, crossings, ties, coarse)


def _memory(nbytes: float) -> str:
    nbytes = float(nbytes)
    for unit, size in (("MB", 1e6), ("kB", 1e3)):
        if nbytes >= size:
            return f"{nbytes / size:.3g} {unit}"
    return f"{nbytes:.0f} B"


def format_table(rows: list[MethodResult]) -> str:
    """A plain-text table for the terminal."""
    head = (f"{'method':18s} {'set-up ms':>10s} {'ns/draw':>9s} {'range ns':>15s} {'draws/s':>9s} "
            f"{'accept':>7s} {'U/draw':>7s} {'f/draw':>7s} {'squeeze':>8s} {'table B':>9s} {'u-error':>9s}")
    lines = [head, "-" * len(head)]

    def fmt(v, spec):
        width = int("".join(ch for ch in spec.split(".")[0] if ch.isdigit()) or 0)
        return format(v, spec) if v is not None else "-".rjust(width)

    for r in rows:
        if not r.applicable:
            lines.append(f"{r.method:18s} not applicable: {r.reason}")
            continue
        spread = f"{1e9 * r.seconds_per_draw_low:.1f}-{1e9 * r.seconds_per_draw_high:.1f}"
        lines.append(f"{r.method:18s} {fmt(r.setup_ms, '10.2f')} {1e9 * r.seconds_per_draw:9.1f} {spread:>15s} "
                     f"{count_words(r.draws_per_second):>9s} "
                     f"{fmt(r.acceptance_rate, '7.3f')} {fmt(r.uniforms_per_sample, '7.3f')} "
                     f"{fmt(r.density_evals_per_sample, '7.3f')} {fmt(r.squeeze_rate, '8.3f')} "
                     f"{fmt(r.table_bytes, '9d')} {fmt(r.u_error, '9.2g')}")
    return "\n".join(lines)
