"""Life figures (MTTF, B-lives, mission reliability) from draws or from the model itself.

Normal-theory interval for the mean, distribution-free order-statistic intervals for
quantiles (Hahn & Meeker, Statistical Intervals, 1991, ch. 5) and Wilson (1927) score intervals.
"""
from __future__ import annotations

import math
import sys

import numpy as np
from scipy import stats as _stats

from .errors import ModelError, finite_number

B_LIVES = {"B1": 0.01, "B10": 0.10, "B50": 0.50}
STREAMING_BINS = 2**16


def life_summary(samples, mission_times=(), confidence=0.95) -> dict:
    """MTTF, B1/B10/B50 lives and R(t) at each mission time, each with a two-sided interval.

    - MTTF: sample mean ± z·s/sqrt(n) (normal theory; needs a finite variance).
    - B-lives: the sample p-quantile (numpy's default, Hyndman & Fan 1996 definition 7)
      with the distribution-free interval [x_(r), x_(s)], r and s from Binomial(n, p)
      (Hahn & Meeker 1991, §5.2); ``achieved_confidence`` is its exact binomial
      coverage, at least ``confidence``. A bound the sample is too small to give
      is -inf or +inf.
    - R(t): the fraction of draws beyond t, with the Wilson (1927) score interval.

    ``samples`` may also be a dask array: then the figures are streamed (see
    ``_streaming_summary``) and the result adds ``method`` and ``quantile_error``.
    """
    times = _mission_times(mission_times)
    confidence = _confidence(confidence)
    if _is_dask_array(samples):
        return _streaming_summary(samples, times, confidence)
    xs = np.sort(_samples(samples))
    n = xs.size
    z = _z(confidence)

    b_lives = {}
    for name, p in B_LIVES.items():
        r, s, achieved = _order_statistic_ranks(n, p, confidence)
        b_lives[name] = {"p": p, "estimate": float(np.quantile(xs, p)),
                         "lower": _order_statistic(xs, r), "upper": _order_statistic(xs, s),
                         "achieved_confidence": achieved}
    survivors = n - np.searchsorted(xs, times, side="right")
    sd = float(np.std(xs, ddof=1)) if n > 1 else math.nan
    return {
        "n": n,
        "confidence": confidence,
        "mttf": _mean_interval(float(np.mean(xs)), sd, n, z),
        "b_lives": b_lives,
        "reliability": _reliability_rows(times, survivors, n, z),
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

def _z(confidence: float) -> float:
    return float(_stats.norm.ppf(0.5 + confidence / 2.0))


def _mean_interval(mean: float, sd: float, n: int, z: float) -> dict:
    half = z * sd / math.sqrt(n)
    return {"estimate": mean, "lower": mean - half, "upper": mean + half}


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


def _order_statistic(xs: np.ndarray, rank: int) -> float:
    if rank < 1:
        return -math.inf
    if rank > xs.size:
        return math.inf
    return float(xs[rank - 1])


def _wilson(successes, n: int, z: float):
    """Wilson (1927) score interval for a binomial proportion, vectorised over ``successes``."""
    p = np.asarray(successes, dtype=float) / n
    z2n = z * z / n
    centre = (p + z2n / 2.0) / (1.0 + z2n)
    half = z / (1.0 + z2n) * np.sqrt(p * (1.0 - p) / n + z * z / (4.0 * n * n))
    return p, np.clip(centre - half, 0.0, 1.0), np.clip(centre + half, 0.0, 1.0)


def _reliability_rows(times, survivors, n: int, z: float) -> list:
    est, lower, upper = _wilson(survivors, n, z)
    return [{"time": float(t), "estimate": float(e), "lower": float(lo), "upper": float(hi)}
            for t, e, lo, hi in zip(times, est, lower, upper)]


# ---- dask: streaming figures -----------------------------------------------------------

def _is_dask_array(obj) -> bool:
    da = sys.modules.get("dask.array")
    return da is not None and isinstance(obj, da.Array)


def _streaming_summary(x, times, confidence) -> dict:
    """Life figures from a dask array in two passes, never holding the draws in memory.

    Pass 1: count, min, max, mean, sd, finiteness and the survivor count at each
    mission time (MTTF and R(t) are exact). Pass 2: a 2^16-bin histogram between
    min and max. Each order statistic is placed inside the bin that holds it, by
    its rank within the bin, so it is off by less than one bin width; a B-life
    estimate interpolates two neighbouring order statistics with weights summing
    to 1, so it too is within one bin width (``quantile_error``) of the in-memory
    figure, and so are the interval bounds.
    """
    import dask
    import dask.array as da

    if x.ndim != 1:
        raise ModelError("samples", f"must be a 1-D array, got {x.ndim} dimensions")
    if math.isnan(x.size):  # chunk sizes unknown (e.g. after boolean indexing): one counting pass
        x = x.compute_chunk_sizes()
    survivors = [(x > t).sum() for t in times]
    n, lo, hi, mean, sd, finite, *survivors = dask.compute(
        x.size, x.min() if x.size else 0.0, x.max() if x.size else 0.0,
        x.mean() if x.size else 0.0, x.std(ddof=1) if x.size > 1 else math.nan,
        da.isfinite(x).all(), *survivors)
    n = int(n)
    if n == 0:
        raise ModelError("samples", "must not be empty")
    if not finite:
        raise ModelError("samples", "must be finite; some are NaN or infinite")
    lo, hi = float(lo), float(hi)
    z = _z(confidence)

    if hi > lo:
        counts, edges = da.histogram(x, bins=STREAMING_BINS, range=(lo, hi))
        counts = np.asarray(counts.compute(), dtype=np.int64)
        width = (hi - lo) / STREAMING_BINS
    else:
        counts, edges, width = np.array([n]), np.array([lo, hi]), 0.0
    cum = np.cumsum(counts)

    def order_stat(rank0):
        """Estimate of the 0-based rank0-th order statistic from the histogram."""
        rank0 = np.asarray(rank0)
        b = np.searchsorted(cum, rank0, side="right")
        before = np.where(b > 0, cum[b - 1], 0)
        frac = (rank0 - before + 0.5) / counts[b]
        return edges[b] + frac * (edges[b + 1] - edges[b])

    b_lives = {}
    for name, p in B_LIVES.items():
        # numpy's default quantile: h = (n - 1) p between x_(floor h) and x_(floor h + 1).
        h = (n - 1) * p
        j = int(math.floor(h))
        pair = order_stat([j, min(j + 1, n - 1)])
        estimate = float(pair[0] + (h - j) * (pair[1] - pair[0]))
        r, s, achieved = _order_statistic_ranks(n, p, confidence)
        lower = -math.inf if r < 1 else float(order_stat(r - 1))
        upper = math.inf if s > n else float(order_stat(s - 1))
        b_lives[name] = {"p": p, "estimate": estimate, "lower": lower, "upper": upper,
                         "achieved_confidence": achieved}
    return {
        "n": n,
        "confidence": confidence,
        "mttf": _mean_interval(float(mean), float(sd), n, z),
        "b_lives": b_lives,
        "reliability": _reliability_rows(times, np.asarray(survivors, dtype=float), n, z),
        "method": "streaming",
        "quantile_error": width,
    }


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
