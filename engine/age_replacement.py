"""The age-replacement policy: replace a unit at failure or at age T, whichever comes first, and
choose T to minimise the long-run cost per unit time.

Cost rate C(T) = [c_p R(T) + c_f F(T)] / integral_0^T R(t) dt (Barlow & Proschan 1965,
Mathematical Theory of Reliability, ch. 4, by the renewal-reward theorem); run to failure costs
c_f / MTTF. A finite optimum needs a rising hazard and c_p < c_f.
"""
from __future__ import annotations

import math

import numpy as np
from scipy import optimize

from .errors import ModelError, finite_number
from .numeric import CumulativeIntegral
from .renewal import as_target
from .target import Target

#: Quantile levels of the curve's grid: dense at low ages, where optima of wear-out parts lie.
GRID_LEVELS = np.unique(np.concatenate([np.geomspace(1e-4, 0.1, 80), np.linspace(0.1, 0.9999, 160)]))
#: A minimum counts as a saving only below (1 - this) x the run-to-failure cost rate.
SAVING_FLOOR = 1e-6


class IntegratedReliability:
    """T -> integral_0^T R(t) dt (the mean time in service of a unit replaced at age T),
    by adaptive Gauss-Legendre on the model's own support map (engine.numeric), atoms as breakpoints."""

    def __init__(self, target: Target):
        self.target = target
        self.lo = target.support[0]
        breaks = [t for t, _ in target.atom_masses()]
        self.integral = CumulativeIntegral(lambda t: np.asarray(target.sf(t), dtype=float), target.mapping,
                                           rtol=1e-11, field="target", breakpoints=breaks)

    def __call__(self, T) -> np.ndarray:
        T = np.asarray(T, dtype=float)
        # R = 1 below the support's lower end: integral_0^T R = lo + integral_lo^T R (also for lo < 0,
        # where R is 1 on [lo, 0] up to what as_target allows).
        inside = np.asarray(self.integral(np.maximum(T, self.lo)), dtype=float)
        return np.where(T <= self.lo, T, self.lo + inside) if self.lo > 0 else self.lo + inside


def cost_rate(target: Target, ages, cost_preventive: float, cost_failure: float,
              integrated: IntegratedReliability | None = None) -> np.ndarray:
    """C(T) = [c_p R(T) + c_f F(T)] / integral_0^T R(t) dt at each age T > 0."""
    integrated = integrated or IntegratedReliability(target)
    T = np.asarray(ages, dtype=float)
    return (cost_preventive * np.asarray(target.sf(T)) + cost_failure * np.asarray(target.cdf(T))) / integrated(T)


def age_replacement(target, cost_preventive, cost_failure) -> dict:
    """The optimal preventive-replacement age and the cost-rate curve.

    Returns ``optimal_age`` (None where no finite age beats running to failure: a constant or falling
    hazard, or c_p >= c_f), ``cost_rate`` (C at the optimum, else the run-to-failure rate),
    ``cost_rate_run_to_failure`` (c_f / MTTF), ``saving`` (1 - cost_rate / run-to-failure rate) and
    the curve on a grid: ``ages`` and ``cost_rates``.
    """
    target = as_target(target)
    cp = finite_number("cost_preventive", cost_preventive, positive=True)
    cf = finite_number("cost_failure", cost_failure, positive=True)
    mttf = float(target.mean())
    if not (math.isfinite(mttf) and mttf > 0):
        raise ModelError("target", "needs a finite mean life (MTTF) for a cost per unit time")
    run_to_failure = cf / mttf
    integrated = IntegratedReliability(target)
    ages = np.unique(np.asarray(target.quantile(GRID_LEVELS), dtype=float))
    ages = ages[np.isfinite(ages) & (ages > max(target.support[0], 0.0))]
    curve = cost_rate(target, ages, cp, cf, integrated)
    best = int(np.argmin(curve))
    optimum, rate = None, run_to_failure
    if best < ages.size - 1 and curve[best] < run_to_failure * (1.0 - SAVING_FLOOR):
        a = ages[best - 1] if best > 0 else 0.5 * ages[0]
        b = ages[best + 1]
        found = optimize.minimize_scalar(lambda T: float(cost_rate(target, T, cp, cf, integrated)),
                                         bounds=(a, b), method="bounded",
                                         options={"xatol": 1e-10 * b})
        optimum, rate = (float(found.x), float(found.fun)) if found.fun <= curve[best] else (float(ages[best]),
                                                                                            float(curve[best]))
    return {"optimal_age": optimum, "cost_rate": rate, "cost_rate_run_to_failure": run_to_failure,
            "saving": 1.0 - rate / run_to_failure, "ages": ages, "cost_rates": curve,
            "cost_preventive": cp, "cost_failure": cf, "mttf": mttf,
            "method": "Barlow & Proschan (1965), age replacement by the renewal-reward theorem"}
