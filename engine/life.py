"""Life figures (MTTF, B-lives, mission reliability) from draws or from the model itself.

Normal-theory interval for the mean, distribution-free order-statistic intervals for
quantiles (Hahn & Meeker, Statistical Intervals, 1991, ch. 5) and Wilson (1927) score
intervals, all from the sample's exact statistics at any size (order_statistics.py).
"""
from __future__ import annotations

import functools
import math
import os
import sys

import numpy as np
from scipy import stats as _stats

from .errors import ModelError, finite_number
from .order_statistics import chunked_pass, in_memory_pass

B_LIVES = {"B1": 0.01, "B10": 0.10, "B50": 0.50}


def life_summary(samples, mission_times=(), confidence=0.95) -> dict:
    """MTTF, B1/B10/B50 lives and R(t) at each mission time, each with a two-sided interval.

    - MTTF: sample mean ± z·s/sqrt(n) (normal theory; needs a finite variance).
    - B-lives: the sample p-quantile (numpy's default, Hyndman & Fan 1996 definition 7,
      from the exact order statistics x_(j), x_(j+1)) with the distribution-free interval
      [x_(r), x_(s)], r and s from Binomial(n, p) (Hahn & Meeker 1991, §5.2);
      ``achieved_confidence`` is its exact binomial coverage, at least ``confidence``.
      A bound the sample is too small to give is -inf or +inf.
    - R(t): the fraction of draws beyond t, with the Wilson (1927) score interval.

    ``samples`` is a numpy array (or anything array-like), a dask array, or the folder
    of a finished ``generate(..., out=folder)`` run. Every figure is exact for the
    sample at any size: dask arrays and shard folders are read chunk by chunk in
    bounded memory (``order_statistics.py``), and ``computation`` says how
    (``method``, ``passes`` over the draws, draws ``kept`` in memory for the ranks).
    """
    times = _mission_times(mission_times)
    confidence = _confidence(confidence)
    if isinstance(samples, (str, os.PathLike)):
        from .generate import open_shards
        samples = open_shards(samples)

    def wanted_ranks(n):
        # Known from n alone, so a chunked sample can look for them in its one pass.
        return sorted({k for (_, _, j, j1, r, s, _) in _rank_plans(n, confidence).values()
                       for k in (j, j1, r - 1, s - 1) if 0 <= k < n})

    if _is_dask_array(samples):
        stats, values, computation = chunked_pass(samples, times, wanted_ranks)
    else:
        stats, values, computation = in_memory_pass(_samples(samples), times, wanted_ranks)
    n = stats.n
    z = _z(confidence)
    b_lives = {}
    for name, (p, frac, j, j1, r, s, achieved) in _rank_plans(n, confidence).items():
        lo_v, hi_v = values[j], values[j1]
        # numpy's own interpolation (numpy.lib._function_base_impl._lerp), so the
        # estimate equals np.quantile(samples, p) to the last bit.
        estimate = hi_v - (hi_v - lo_v) * (1.0 - frac) if frac >= 0.5 else lo_v + (hi_v - lo_v) * frac
        b_lives[name] = {"p": p, "estimate": float(estimate),
                         "lower": -math.inf if r < 1 else float(values[r - 1]),
                         "upper": math.inf if s > n else float(values[s - 1]),
                         "achieved_confidence": achieved}
    return {
        "n": n,
        "confidence": confidence,
        "mttf": _mean_interval(stats.mean, stats.sd, n, z),
        "b_lives": b_lives,
        "reliability": _reliability_rows(times, stats.survivors, n, z),
        "method": computation["method"],
        "passes": computation["passes"],
        "computation": computation,
    }


def exact_life_figures(target, mission_times=()) -> dict:
    """The model's own figures: MTTF = target.mean(), Bp = target.quantile(p), R(t) = target.sf(t)."""
    times = _mission_times(mission_times)
    for name in ("mean", "quantile", "sf"):
        if not callable(getattr(target, name, None)):
            raise ModelError("target", f"needs {name}(); got {type(target).__name__}")
    b_values = np.asarray(target.quantile(np.array(list(B_LIVES.values()))), dtype=float)
    reliability = np.asarray(target.sf(times), dtype=float) if times.size else np.empty(0)
    describe = getattr(target, "describe", None)
    return {
        "target": str(describe()) if callable(describe) else type(target).__name__,
        "mttf": {"value": float(target.mean())},
        "b_lives": {name: {"p": p, "value": float(v)}
                    for (name, p), v in zip(B_LIVES.items(), b_values)},
        "reliability": [{"time": float(t), "value": float(r)} for t, r in zip(times, reliability)],
    }


# ---- intervals ------------------------------------------------------------------------

@functools.lru_cache(maxsize=64)
def _z(confidence: float) -> float:
    return float(_stats.norm.ppf(0.5 + confidence / 2.0))


def _mean_interval(mean: float, sd: float, n: int, z: float) -> dict:
    half = z * sd / math.sqrt(n)
    return {"estimate": mean, "lower": mean - half, "upper": mean + half}


def _rank_plans(n: int, confidence: float) -> dict:
    """For each B-life: (p, fraction, j, j + 1, r, s, achieved), 0-based j for numpy's default
    quantile (between x_(j+1) and x_(j+2), 1-based) and the interval's 1-based ranks r, s."""
    plans = {}
    for name, p in B_LIVES.items():
        h = (n - 1) * p
        j = int(math.floor(h))
        r, s, achieved = _order_statistic_ranks(n, p, confidence)
        plans[name] = (p, h - j, j, min(j + 1, n - 1), r, s, achieved)
    return plans


@functools.lru_cache(maxsize=256)
def _order_statistic_ranks(n: int, p: float, confidence: float):
    """1-based ranks r, s with P(x_(r) <= x_p <= x_(s)) >= confidence, and that probability.

    The number of draws below the true p-quantile is Binomial(n, p); the interval
    covers it unless fewer than r or at least s draws fall below
    (Hahn & Meeker 1991, §5.2). Rank 0 or n + 1 means no bound on that side.
    """
    tail = (1.0 - confidence) / 2.0
    r = int(_stats.binom.ppf(tail, n, p))
    s = int(_stats.binom.ppf(1.0 - tail, n, p)) + 1
    achieved = float(_stats.binom.cdf(s - 1, n, p) - _stats.binom.cdf(r - 1, n, p))
    return r, s, achieved


def _wilson(successes, n: int, z: float):
    """Wilson (1927) score interval for a binomial proportion, vectorised over ``successes``.

    Its ends are exactly 0 when no draw succeeds and exactly 1 when all do (the formula's
    own limits); they are set so, since centre ± half rounds to 1e-17 or 1 - 1.1e-16 there.
    """
    k = np.asarray(successes, dtype=float)
    p = k / n
    z2n = z * z / n
    centre = (p + z2n / 2.0) / (1.0 + z2n)
    half = z / (1.0 + z2n) * np.sqrt(p * (1.0 - p) / n + z * z / (4.0 * n * n))
    lower = np.where(k <= 0, 0.0, np.clip(centre - half, 0.0, 1.0))
    upper = np.where(k >= n, 1.0, np.clip(centre + half, 0.0, 1.0))
    return p, lower, upper


# ---- verdicts ---------------------------------------------------------------------------

#: Rounding slack of a verdict, in units in the last place of the largest number compared.
VERDICT_ULPS = 4


def inside_interval(value, lower, upper, ulps: int = VERDICT_ULPS) -> bool | None:
    """Does ``value`` lie in [lower, upper], allowing ``ulps`` units in the last place of the
    largest finite magnitude among the three for rounding? None when any is missing or NaN.

    An interval end of 0.9999999999999999 beside an exact value of 1 (or 1e-17 beside 0) is
    rounding, not evidence: a relative slack of a few ulps keeps such rows from crying wolf
    without hiding any real miss (which is many ulps wide for any sample below 10^30 draws).
    """
    try:
        v, lo, hi = float(value), float(lower), float(upper)
    except (TypeError, ValueError):
        return None
    if math.isnan(v) or math.isnan(lo) or math.isnan(hi):
        return None
    finite = [abs(x) for x in (v, lo, hi) if math.isfinite(x)]
    slack = ulps * np.finfo(float).eps * (max(finite) if finite else 0.0)
    return bool(lo - slack <= v <= hi + slack)


def verdict_legend(confidence: float = 0.95) -> str:
    """One line saying what a ✓/✗ beside an interval means and how often a correct sampler shows ✗."""
    miss = 1.0 - confidence
    return (f"✓: the model's exact value lies inside the {confidence:.0%} interval from the draws "
            f"(allowing {VERDICT_ULPS} ulps for rounding); ✗: outside. Each interval misses the true "
            f"value {miss:.0%} of the time, so a correct sampler still shows ✗ in about 1 row in "
            f"{1.0 / miss:.0f}.")


def _reliability_rows(times, survivors, n: int, z: float) -> list:
    est, lower, upper = _wilson(survivors, n, z)
    return [{"time": float(t), "estimate": float(e), "lower": float(lo), "upper": float(hi)}
            for t, e, lo, hi in zip(times, est, lower, upper)]


# ---- input kinds -------------------------------------------------------------------------

def _is_dask_array(obj) -> bool:
    da = sys.modules.get("dask.array")
    return da is not None and isinstance(obj, da.Array)


# ---- validation -----------------------------------------------------------------------

def _samples(samples) -> np.ndarray:
    try:
        x = np.asarray(samples, dtype=float)
    except (TypeError, ValueError):
        raise ModelError("samples", "must be numbers") from None
    if x.ndim != 1:
        raise ModelError("samples", f"must be a 1-D array, got {x.ndim} dimensions")
    if x.size == 0:
        raise ModelError("samples", "must not be empty")
    bad = np.count_nonzero(~np.isfinite(x))
    if bad:
        raise ModelError("samples", f"must be finite; {bad} are NaN or infinite")
    return x


def _mission_times(mission_times) -> np.ndarray:
    try:
        t = np.atleast_1d(np.asarray(mission_times, dtype=float))
    except (TypeError, ValueError):
        raise ModelError("mission_times", "must be numbers") from None
    if t.ndim != 1:
        raise ModelError("mission_times", "must be a flat list of times")
    if not np.all(np.isfinite(t)):
        raise ModelError("mission_times", "must be finite")
    return t


def _confidence(confidence) -> float:
    c = finite_number("confidence", confidence)
    if not 0.0 < c < 1.0:
        raise ModelError("confidence", f"must be strictly between 0 and 1, got {c:g}")
    return c


# ---- plain text ---------------------------------------------------------------------------

def format_life_figures(sample: dict, exact: dict | None = None, unit: str = "") -> str:
    """A terminal table of ``life_summary`` figures with their intervals, beside the model's
    exact values and a ✓/✗ verdict when ``exact`` (from ``exact_life_figures``) is given,
    then the verdict legend and how the figures were computed."""
    conf = sample["confidence"]
    u, paren = (f" {unit}", f" ({unit})") if unit else ("", "")
    head = f"{'figure':<14}{'estimate':>14}{f'{conf:.0%} interval':>32}"
    lines = [head + (f"{'exact':>14}  in?" if exact else "")]

    def row(name, s, value, pct=False):
        def f(v):
            return f"{100 * v:.4f} %" if pct else f"{v:.6g}"
        text = f"{name:<14}{f(s['estimate']):>14}{f(s['lower']) + ' to ' + f(s['upper']):>32}"
        if exact:
            verdict = inside_interval(value, s["lower"], s["upper"])
            text += f"{f(value):>14}  {'–' if verdict is None else ('✓' if verdict else '✗')}"
        lines.append(text)

    row(f"MTTF{paren}", sample["mttf"], exact["mttf"]["value"] if exact else None)
    for name, s in sample["b_lives"].items():
        row(f"{name}{paren}", s, exact["b_lives"][name]["value"] if exact else None)
    for i, s in enumerate(sample["reliability"]):
        row(f"R({s['time']:g}{u})", s, exact["reliability"][i]["value"] if exact else None, pct=True)
    if exact:
        lines.append(verdict_legend(conf))
    computation = sample.get("computation", {})
    if computation.get("text"):
        lines.append(f"Computed from {computation['text']}.")
    return "\n".join(lines)

