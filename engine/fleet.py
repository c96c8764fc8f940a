"""Fleet simulation: failures and replacements per period over a fleet of sockets whose failed
(or, under an age-replacement policy, aged) units are replaced at once by new ones.

Each socket is a renewal process (Cox 1962, Renewal Theory, ch. 1-2); units already in service
start from their residual life (conditional inversion, ``Sampler.sample_residual``). The
simulation runs in vectorised renewal rounds over every unit x run at once, chunked by units,
chunk i drawing from SeedSequence(seed, spawn_key=(i,)) as in ``engine.generate``; the exact
expectation beside it solves the renewal equation (``engine.renewal``).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Callable

import numpy as np
from scipy import stats

from . import kernels
from .cautions import FLEET_CAUTION
from .errors import ModelError, finite_number
from .generate import (ShippedSampler, as_drawable, check_client, chunk_rng, cluster_threads, local_threads,
                       whole_number)
from .methods.base import Sampler, residual_ages, residual_by_rejection
from .task_windows import run_on_cluster, run_on_threads
from .renewal import (MAX_STEPS, as_target, convolve_on_grid, cycle_law, failure_part, refine, solve_on_grid,
                      steps_for)

#: Unit x run entries per chunk: big enough to amortise numpy's per-call cost, small enough for cache.
ENTRIES_PER_CHUNK = 1 << 20
MAX_PERIODS = 10_000
MAX_RUNS = 100_000
MAX_UNITS = 100_000_000
#: Above this many lifetimes to draw in all, a simulation is refused (it would run for hours).
MAX_DRAWS = 20_000_000_000
#: Exact expectations are solved for at most this many distinct ages in service.
MAX_DISTINCT_AGES = 100
MAX_ROUNDS = 1_000_000
PILOT = 2000
#: Systems draw residual lives by rejection where R(a) is at least this, for at most this many rounds.
SYSTEM_REJECTION_BELOW = 0.05
SYSTEM_REJECTION_ROUNDS = 60

Progress = Callable[[int, int], None]


# ---- one chunk: vectorised renewal rounds -----------------------------------------------------

def residual_draws(drawable, ages: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Residual lives for units aged ``ages``: the sampler's own conditional inversion; for a system,
    rejection (draw system lives until one exceeds the age: exact, and cheap where R(a) is not small),
    then conditional inversion on the system's exact reliability for what is left."""
    if isinstance(drawable, Sampler):
        return drawable.sample_residual(ages, rng)
    target = as_target(drawable, "sampler")
    survive = np.asarray(target.sf(ages), dtype=float)
    if not np.all(survive > 0):
        raise ModelError("ages", "an age lies beyond every lifetime the system allows (reliability 0)")

    def exact_tail(rows, v):
        return np.maximum(np.asarray(target.isf(v * survive[rows]), dtype=float) - ages[rows], 0.0)
    return residual_by_rejection(drawable.sample, ages, survive, ages == 0, exact_tail, rng,
                                 rounds=SYSTEM_REJECTION_ROUNDS, exact_below=SYSTEM_REJECTION_BELOW)


def renewal_rounds(drawable, ages: np.ndarray, runs: int, horizon: float, period: float, n_periods: int,
                   preventive_age: float | None, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """Failures and replacements per (run, period) for these units, all runs at once.

    Entry e = r * units + j is unit j in run r. Each round draws one lifetime for every socket still
    inside the horizon and moves its clock to the next failure (or preventive replacement).
    """
    units = ages.size
    bins = runs * n_periods
    failures = np.zeros(bins, dtype=np.int64)
    replacements = np.zeros(bins, dtype=np.int64)
    # Each entry's first bin (its run's offset); one run needs none.
    run = np.repeat(np.arange(runs, dtype=np.int64) * n_periods, units) if runs > 1 else None
    age = np.tile(ages, runs)
    limit = None
    if preventive_age is not None:
        due = age >= preventive_age
        if due.any():   # already past the replacement age: replaced at time 0
            replacements += np.bincount(run[due] if run is not None else np.zeros(int(due.sum()), np.int64),
                                        minlength=bins)
            age = np.where(due, 0.0, age)
        limit = preventive_age - age
    if not np.any(age > 0):
        life = drawable.sample(age.size, rng)
    else:
        life = residual_draws(drawable, age, rng)
    in_place = isinstance(drawable, Sampler)
    buffer = np.empty(age.size) if in_place else None
    clock = np.zeros(age.size)
    active = age.size
    for _ in range(MAX_ROUNDS):
        # One fused pass (engine.kernels.renewal_step): advance, count per period, keep those inside.
        active = kernels.renewal_step(clock[:active], life[:active], limit, None if run is None else run[:active],
                                      horizon, period, n_periods, replacements, failures)
        if active == 0:
            break
        life = drawable.sample(rng=rng, out=buffer[:active]) if in_place else drawable.sample(active, rng)
        limit = preventive_age
    else:
        raise ModelError("horizon", f"more than {MAX_ROUNDS} replacements in one socket: lifetimes are "
                                    "too short for this horizon")
    if preventive_age is None:
        replacements = failures.copy()
    return failures.reshape(runs, n_periods), replacements.reshape(runs, n_periods)


def simulate_chunk(shipped: ShippedSampler, seed: int, index: int, ages: np.ndarray, runs: int, horizon: float,
                   period: float, n_periods: int, preventive_age: float | None):
    """Chunk ``index`` of the fleet: its own copy of the sampler, its own stream chunk_rng(seed, index)."""
    return renewal_rounds(shipped.fresh(), ages, runs, horizon, period, n_periods, preventive_age,
                          chunk_rng(seed, index))


# ---- exact expectations ------------------------------------------------------------------------------

def expected_counts(target, ages: np.ndarray, edges: np.ndarray, preventive_age: float | None):
    """Exact expected failures and replacements per period over the fleet (renewal equation for new
    units, one delayed first cycle per distinct age in service), with an error estimate; None where
    the fleet has more than MAX_DISTINCT_AGES distinct ages."""
    distinct, counts = np.unique(ages, return_counts=True)
    if distinct.size > MAX_DISTINCT_AGES:
        return None
    n_periods = edges.size - 1
    period = edges[1] - edges[0]
    cut = math.inf if preventive_age is None else preventive_age
    t_end = n_periods * period
    # Put the jumps of the replacement count (preventive replacements at cut - a, cut, 2 cut, ...) on
    # the grid where they are simple fractions of the period: a jump between grid points is smeared.
    jumps = [] if preventive_age is None else [cut, *(cut - a for a in distinct if 0 < a < cut)]
    align = _grid_alignment(jumps, period, n_periods)
    n_steps = steps_for(target, t_end, multiple_of=n_periods * align)
    new_law = cycle_law(target, cut)
    first_cycles = []
    for a in distinct:
        if a == 0 or a >= cut:
            first_cycles.append(None)
        else:
            residual = target.given_survival(float(a))
            first_cycles.append((cycle_law(residual, cut - a), failure_part(residual, cut - a)))

    def solve(steps, step):
        grid = step * np.arange(steps + 1)
        k_fail = solve_on_grid(failure_part(target, cut)(grid), new_law, step)
        k_repl = k_fail if preventive_age is None else solve_on_grid(new_law.cdf(grid), new_law, step)
        total = np.zeros((2, steps + 1))
        for a, count, first in zip(distinct, counts, first_cycles):
            if first is None:
                # New, or past the replacement age and replaced at time 0 (one more replacement).
                fail, repl = k_fail, k_repl + (1.0 if a > 0 and a >= cut else 0.0)
            else:
                law, fails_first = first
                fail = fails_first(grid) + convolve_on_grid(k_fail, law, step)
                repl = law.cdf(grid) + convolve_on_grid(k_repl, law, step)
            total[0] += count * fail
            total[1] += count * repl
        return total

    solution = refine(solve, n_steps, t_end / n_steps)
    by_edge = solution.at(edges)
    by_edge[:, 0] = 0.0          # events at time 0 belong to the first period
    per_period = np.diff(by_edge, axis=-1)
    error = solution.error_at(edges)
    return per_period[0], per_period[1], float(np.max(error))


def _grid_alignment(times, period: float, n_periods: int, limit: int = 64) -> int:
    """The smallest q such that every time that is a simple fraction p/q' of the period (q' <= limit)
    falls on a grid of period/q; 1 where that grid would be too fine."""
    q = 1
    for x in times:
        ratio = x / period
        f = Fraction(ratio).limit_denominator(limit)
        if abs(float(f) - ratio) <= 1e-12 * max(1.0, ratio):
            q = math.lcm(q, f.denominator)
    return q if q <= limit and 2 * n_periods * q <= MAX_STEPS else 1


# ---- the result ------------------------------------------------------------------------------------

@dataclass
class FleetResult:
    """What ``simulate_fleet`` found: counts per run and period, and the exact references."""

    failures: np.ndarray
    replacements: np.ndarray
    expected_failures: np.ndarray | None
    expected_replacements: np.ndarray | None
    edges: np.ndarray
    units: int
    runs: int
    horizon: float
    period: float
    preventive_age: float | None
    seed: int
    method: str
    expected_error: float | None = None
    caution: str = field(default=FLEET_CAUTION)

    @property
    def periods(self) -> int:
        return self.failures.shape[1]

    @property
    def demand(self) -> np.ndarray:
        """Replacements over the whole horizon, one total per run (the spares each run consumed)."""
        return self.replacements.sum(axis=1)

    def band(self, level: float = 0.9) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Mean failures per period and the central ``level`` band of the runs (percentiles)."""
        level = finite_number("level", level, low=0.0, high=1.0)
        lo, hi = np.quantile(self.failures, [(1 - level) / 2, (1 + level) / 2], axis=0)
        return self.failures.mean(axis=0), lo, hi

    def mean_interval(self, confidence: float = 0.95) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Mean failures per period with its normal-theory interval over the runs."""
        z = float(stats.norm.ppf(0.5 + confidence / 2))
        mean = self.failures.mean(axis=0)
        half = z * self.failures.std(axis=0, ddof=1) / math.sqrt(self.runs) if self.runs > 1 else np.full(mean.shape, np.inf)
        return mean, mean - half, mean + half

    def spares(self, service_level: float, confidence: float = 0.95) -> dict:
        """The stock that covers the horizon's demand with probability ``service_level``: the
        empirical quantile of the runs' total replacements (inverted-cdf definition, Hyndman &
        Fan 1996 definition 1), with the distribution-free order-statistic interval [D_(l), D_(u)]
        from Binomial(runs, level) (Hahn & Meeker 1991, Statistical Intervals, section 5.2)."""
        level = finite_number("service_level", service_level)
        if not 0.0 < level < 1.0:
            raise ModelError("service_level", f"must lie strictly between 0 and 1, got {level:g}")
        demand = np.sort(self.demand)
        n = demand.size
        stock = int(demand[max(math.ceil(level * n), 1) - 1])
        alpha = (1.0 - confidence) / 2.0
        lower_rank = int(stats.binom.ppf(alpha, n, level))          # P(Bin <= l - 1) <= alpha
        upper_rank = int(stats.binom.ppf(1.0 - alpha, n, level)) + 1
        low = int(demand[lower_rank - 1]) if lower_rank >= 1 else None
        high = int(demand[upper_rank - 1]) if upper_rank <= n else None
        return {"service_level": level, "stock": stock, "low": low, "high": high, "confidence": confidence,
                "runs": n, "mean_demand": float(demand.mean()),
                "note": "a bound is None where the runs are too few to give it"}

    def summary(self, time_unit: str = "time units") -> str:
        """Plain text: the fleet, failures per period (simulated and exact), spares, the caution."""
        mean, lo, hi = self.band(0.9)
        lines = [f"Fleet of {self.units:,} units over {self.horizon:g} {time_unit} in {self.periods} periods of "
                 f"{self.period:g}; {self.runs} runs, seed {self.seed}, method {self.method}.",
                 "Replacement: instant, by a new unit" + (f"; preventive replacement at age {self.preventive_age:g}"
                                                          if self.preventive_age is not None else "") + ".",
                 f"{'period':>6} {'from':>10} {'to':>10} {'mean':>10} {'5%':>8} {'95%':>8} {'exact':>10}"]
        for k in range(self.periods):
            exact = f"{self.expected_failures[k]:10.3f}" if self.expected_failures is not None else f"{'n/a':>10}"
            lines.append(f"{k + 1:>6} {self.edges[k]:>10g} {self.edges[k + 1]:>10g} {mean[k]:>10.3f} "
                         f"{lo[k]:>8g} {hi[k]:>8g} {exact}")
        total = self.failures.sum(axis=1)
        exact_total = (f"{self.expected_failures.sum():.3f}" if self.expected_failures is not None
                       else "n/a (too many distinct ages for the exact solution)")
        lines.append(f"failures over the horizon: mean {total.mean():.3f} (exact {exact_total})")
        if self.preventive_age is not None:
            lines.append(f"preventive replacements over the horizon: mean "
                         f"{(self.replacements.sum(axis=1) - total).mean():.3f}")
        for level in (0.9, 0.95, 0.99):
            s = self.spares(level)
            interval = f"[{s['low'] if s['low'] is not None else '-'}, {s['high'] if s['high'] is not None else '-'}]"
            lines.append(f"spares for a {level:.0%} service level: {s['stock']} (95% interval {interval})")
        lines.append(self.caution)
        return "\n".join(lines)


# ---- the public verb -----------------------------------------------------------------------------------

def _period_edges(horizon: float, period: float) -> np.ndarray:
    n_periods = max(1, math.ceil(horizon / period * (1 - 1e-12)))
    if n_periods > MAX_PERIODS:
        raise ModelError("period", f"{horizon:g} / {period:g} makes {n_periods} periods; at most {MAX_PERIODS}")
    edges = period * np.arange(n_periods + 1)
    edges[-1] = horizon
    return edges


def fleet_ages(ages, units: int) -> np.ndarray:
    """One age per unit from a scalar or a list of ``units`` ages."""
    a = residual_ages(ages)
    if a.size == 1:
        return np.full(units, a[0])
    if a.size != units:
        raise ModelError("ages", f"{a.size} ages for {units} units; give one age, or one per unit")
    return a


def simulate_fleet(sampler, units, horizon, *, period, ages=0.0, preventive_age=None, runs=200, seed=0,
                   client=None, progress: Progress | None = None, exact: bool = True) -> FleetResult:
    """Simulate ``runs`` histories of a fleet of ``units`` sockets over (0, horizon].

    - ``sampler``: a sampler (``fit``), a system or a Target (fitted with "auto").
    - ``period``: the length of a counting period; the last one ends at the horizon.
    - ``ages``: the age of every unit at time 0 (one number, or one per unit); residual lives are
      drawn by ``sampler.sample_residual(ages, rng)`` in one call per chunk.
    - ``preventive_age``: replace a unit at this age if it has not failed (age replacement).
    - ``seed``: chunk i of the units uses SeedSequence(seed, spawn_key=(i,)), so the numbers are
      the same on local threads and on a Dask cluster (``client``).
    - ``progress(done_chunks, total_chunks)`` is called as chunks finish; ``exact=False`` skips the
      exact expectations.
    Assumes independent units, instant and perfect replacement, stationary usage.
    """
    units = whole_number("units", units, 1)
    if units > MAX_UNITS:
        raise ModelError("units", f"at most {MAX_UNITS:,}, got {units:,}")
    runs = whole_number("runs", runs, 1)
    if runs > MAX_RUNS:
        raise ModelError("runs", f"at most {MAX_RUNS:,}, got {runs:,}")
    seed = whole_number("seed", seed, 0)
    horizon = finite_number("horizon", horizon, positive=True)
    period = finite_number("period", period, positive=True)
    edges = _period_edges(horizon, period)
    n_periods = edges.size - 1
    if preventive_age is not None:
        preventive_age = finite_number("preventive_age", preventive_age, positive=True)
    age = fleet_ages(ages, units)
    workers = check_client(client)
    drawable = as_drawable(sampler)
    target = as_target(drawable if not isinstance(drawable, Sampler) else drawable.target, "sampler")
    _check_effort(drawable, units, runs, horizon, preventive_age)

    per_chunk = max(1, ENTRIES_PER_CHUNK // runs)
    starts = list(range(0, units, per_chunk))
    shipped = ShippedSampler.of(drawable)
    failures = np.zeros((runs, n_periods), dtype=np.int64)
    replacements = np.zeros((runs, n_periods), dtype=np.int64)
    tasks = [(i, age[s:s + per_chunk]) for i, s in enumerate(starts)]
    done = 0

    def finished(result):
        nonlocal done, failures, replacements
        failures += result[0]
        replacements += result[1]
        done += 1
        if progress is not None:
            progress(done, len(tasks))

    if progress is not None:
        progress(0, len(tasks))
    settings = (runs, horizon, period, n_periods, preventive_age)

    def chunk_args(task):
        index, chunk_ages = task
        return (seed, index, chunk_ages, *settings)

    if client is None:
        run_on_threads(simulate_chunk, shipped, tasks, chunk_args, finished, local_threads(), "fleet")
    else:
        run_on_cluster(client, simulate_chunk, shipped, tasks, chunk_args, finished,
                       cluster_threads(client, workers), "fleet")

    expected = expected_counts(target, age, edges, preventive_age) if exact else None
    method = drawable.method if isinstance(drawable, Sampler) else "system"
    return FleetResult(failures=failures, replacements=replacements,
                       expected_failures=None if expected is None else expected[0],
                       expected_replacements=None if expected is None else expected[1],
                       edges=edges, units=units, runs=runs, horizon=horizon, period=period,
                       preventive_age=preventive_age, seed=seed, method=method,
                       expected_error=None if expected is None else expected[2])


def _check_effort(drawable, units, runs, horizon, preventive_age) -> None:
    """Refuse a simulation that would draw more than MAX_DRAWS lifetimes, judged by the mean cycle of a
    small pilot sample (its own fixed stream, so the simulation's numbers are untouched)."""
    counts = dict(drawable.counts) if isinstance(drawable, Sampler) else None
    pilot = drawable.sample(PILOT, np.random.default_rng(0))
    if counts is not None:       # the pilot is not part of the user's draws
        drawable.counts = counts
    if preventive_age is not None:
        pilot = np.minimum(pilot, preventive_age)
    cycle = float(np.mean(pilot))
    if not (math.isfinite(cycle) and cycle > 0):
        return
    draws = units * runs * (horizon / cycle + 1.0)
    if draws > MAX_DRAWS:
        raise ModelError("horizon", f"about {draws:.3g} lifetimes would be drawn ({units:,} units x {runs} runs x "
                                    f"{horizon / cycle:.3g} mean lives); at most {MAX_DRAWS:.3g}: "
                                    "shorten the horizon or use fewer units or runs")


