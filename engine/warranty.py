"""Free-replacement warranty claims per calendar period for cohorts of sales: a failed unit under
cover is replaced by a new one whose cover ends when the original's would have.

Claims of one unit in the first w time units after sale form a renewal process, so the expected
claims by age x are M(min(x, w)) with M the renewal function (Blischke & Murthy 1994, Warranty
Cost Analysis, ch. 5, free-replacement policy); the simulated distribution runs the same cohorts
through ``simulate_fleet``.
"""
from __future__ import annotations

import math

import numpy as np
from scipy import stats

from .errors import ModelError, finite_number
from .fleet import simulate_fleet
from .generate import as_drawable, whole_number
from .methods.base import Sampler
from .renewal import as_target, renewal_solution

MAX_COHORTS = 1000


def cohort_sales(sales) -> np.ndarray:
    """Units sold per period as whole numbers >= 0 (at least one period, at most MAX_COHORTS)."""
    try:
        values = np.atleast_1d(np.asarray(sales, dtype=float))
    except (TypeError, ValueError):
        raise ModelError("sales", "must be a list of units sold per period") from None
    if values.ndim != 1 or values.size == 0:
        raise ModelError("sales", "must be a flat list with one number per period")
    if values.size > MAX_COHORTS:
        raise ModelError("sales", f"at most {MAX_COHORTS} periods of sales, got {values.size}")
    bad = np.flatnonzero(~np.isfinite(values) | (values < 0) | (values != np.floor(values)))
    if bad.size:
        i = int(bad[0])
        raise ModelError("sales", f"value {i + 1} is {values[i]!r}; sales are whole numbers >= 0")
    if values.sum() == 0:
        raise ModelError("sales", "no unit is sold in any period")
    return values.astype(np.int64)


def expected_claims(target, sales: np.ndarray, warranty: float, period: float) -> tuple[np.ndarray, float]:
    """Exact expected claims per calendar period: cohort i (sold at the start of period i) claims
    M(min(x, w)) by age x, so in period k it adds sales_i [M(min((k + 1 - i) p, w)) - M(min((k - i) p, w))]."""
    cover_periods = math.ceil(warranty / period * (1 - 1e-12))
    n_calendar = sales.size - 1 + cover_periods
    solution = renewal_solution(target, warranty)
    offsets = period * np.arange(n_calendar + 1)[None, :] - period * np.arange(sales.size)[:, None]
    by_edge = solution.at(np.clip(offsets, 0.0, warranty))
    by_edge = np.where(offsets <= 0, 0.0, by_edge)
    per_period = np.diff(by_edge, axis=1)
    error = float(np.max(solution.error_at(np.array([warranty])))) * float(sales.sum())
    return sales @ per_period, error


def warranty_claims(target, sales, warranty, period, *, runs=200, seed=0, client=None, progress=None) -> dict:
    """Expected and simulated free-replacement claims per calendar period.

    ``target``: a Target, a sampler or a system (the sampler, when given, draws the simulation);
    ``sales[i]``: units sold at the start of period i; ``warranty``: the cover of each unit, in the
    model's time unit; ``period``: the calendar period's length. Returns ``expected`` (exact, one per
    calendar period), ``simulated`` (runs x periods), ``mean``, its 95% interval (``mean_low``,
    ``mean_high``), the central 90% band of the runs (``band_low``, ``band_high``), period ``edges``
    and totals.
    """
    sales = cohort_sales(sales)
    warranty = finite_number("warranty", warranty, positive=True)
    period = finite_number("period", period, positive=True)
    runs = whole_number("runs", runs, 2)
    seed = whole_number("seed", seed, 0)
    drawable = as_drawable(target)
    model = as_target(drawable.target if isinstance(drawable, Sampler) else drawable)
    expected, error = expected_claims(model, sales, warranty, period)
    n_calendar = expected.size
    simulated = np.zeros((runs, n_calendar), dtype=np.int64)
    sold = np.flatnonzero(sales)
    for done, i in enumerate(sold):
        # Each cohort its own stream, derived from (seed, cohort) like generate's chunk streams.
        cohort_seed = int(np.random.SeedSequence(seed, spawn_key=(int(i),)).generate_state(1, np.uint32)[0])
        fleet = simulate_fleet(drawable, int(sales[i]), warranty, period=period, runs=runs, seed=cohort_seed,
                               client=client, exact=False)
        simulated[:, i:i + fleet.periods] += fleet.failures
        if progress is not None:
            progress(done + 1, sold.size)
    mean = simulated.mean(axis=0)
    half = float(stats.norm.ppf(0.975)) * simulated.std(axis=0, ddof=1) / math.sqrt(runs)
    band_low, band_high = np.quantile(simulated, [0.05, 0.95], axis=0)
    return {"edges": period * np.arange(n_calendar + 1), "expected": expected, "expected_error": error,
            "simulated": simulated, "mean": mean, "mean_low": mean - half, "mean_high": mean + half,
            "band_low": band_low, "band_high": band_high, "total_expected": float(expected.sum()),
            "total_mean": float(simulated.sum(axis=1).mean()), "sales": sales, "warranty": warranty,
            "period": period, "runs": runs, "seed": seed,
            "policy": "free replacement; a replacement's cover ends with the original unit's",
            "sold_at": "the start of each sales period"}
