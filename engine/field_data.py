"""Targets built from field data: binned failure counts, and failure times with
suspensions (right-censored) through the product-limit estimate.

Product-limit: Kaplan & Meier (1958), JASA 53, as in the NIST/SEMATECH
e-Handbook 8.2.1.5. The smooth histogram is a monotone cubic (Fritsch &
Carlson 1980, SIAM J. Numer. Anal. 17) through the cumulative bin masses.
"""
from __future__ import annotations

import math
from typing import Sequence

import numpy as np
from scipy.interpolate import PchipInterpolator

from .errors import ModelError, censoring_flags
from .numeric import invert_monotone
from .target import Target


def _vector(field: str, values, *, allow_empty=False) -> np.ndarray:
    try:
        arr = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise ModelError(field, "must be a list of numbers") from None
    if arr.ndim != 1:
        raise ModelError(field, f"must be a flat list of numbers, got shape {arr.shape}")
    if arr.size == 0 and not allow_empty:
        raise ModelError(field, "no data")
    bad = np.flatnonzero(~np.isfinite(arr))
    if bad.size:
        raise ModelError(field, f"entry {bad[0] + 1} is not a finite number ({arr[bad[0]]})")
    return arr


class HistogramTarget(Target):
    """Failures counted in bins: uniform within each bin, or smooth with the same bin masses."""

    kind = "histogram"

    def __init__(self, edges: Sequence[float], counts: Sequence[float], smooth: bool = False):
        edges = _vector("edges", edges)
        counts = _vector("counts", counts)
        if edges.size < 2:
            raise ModelError("edges", "at least two edges (one bin) are needed")
        steps = np.flatnonzero(np.diff(edges) <= 0)
        if steps.size:
            i = int(steps[0])
            raise ModelError("edges", f"must increase strictly; edge {i + 2} ({edges[i + 1]:g}) "
                                      f"is not above edge {i + 1} ({edges[i]:g})")
        if counts.size != edges.size - 1:
            raise ModelError("counts", f"expected {edges.size - 1} counts for {edges.size} edges, "
                                       f"got {counts.size}")
        neg = np.flatnonzero(counts < 0)
        if neg.size:
            i = int(neg[0])
            raise ModelError("counts", f"bin {i + 1} has a negative count ({counts[i]:g})")
        if not counts.max() > 0:
            raise ModelError("counts", "all counts are 0; there is nothing to sample")
        self.edges = edges
        self.counts = counts
        self.smooth = bool(smooth)
        # Scaled by the largest count first, so counts near 1e308 do not overflow the sum.
        scaled = counts / counts.max()
        self.probabilities = scaled / scaled.sum()
        self.widths = np.diff(edges)
        self.cumulative = np.concatenate([[0.0], np.cumsum(self.probabilities)])
        self.cumulative[-1] = 1.0
        # Mass above each edge, summed from the top so upper-tail sf keeps its digits.
        self.upper_mass = np.concatenate([np.cumsum(self.probabilities[::-1])[::-1], [0.0]])
        super().__init__((float(edges[0]), float(edges[-1])), {})
        self.exact_quantile = not self.smooth
        if self.smooth:
            self._spline = PchipInterpolator(edges, self.cumulative)
            self._dspline = self._spline.derivative()

    def _bin(self, t):
        return np.clip(np.searchsorted(self.edges, t, side="right") - 1, 0, self.counts.size - 1)

    def _pdf(self, t):
        if self.smooth:
            return np.maximum(self._dspline(t), 0.0)
        k = self._bin(t)
        return self.probabilities[k] / self.widths[k]

    def _cdf(self, t):
        if self.smooth:
            return np.clip(self._spline(t), 0.0, 1.0)
        k = self._bin(t)
        return self.cumulative[k] + self.probabilities[k] * (t - self.edges[k]) / self.widths[k]

    def _sf(self, t):
        if self.smooth:
            return np.clip(1.0 - self._spline(t), 0.0, 1.0)
        k = self._bin(t)
        return self.upper_mass[k + 1] + self.probabilities[k] * (self.edges[k + 1] - t) / self.widths[k]

    def _quantile(self, u):
        if self.smooth:
            return invert_monotone(self.cdf, self.sf, u, self.mapping, pdf=self.pdf)
        # Bins with no mass are never chosen: side="left" skips flat stretches of F.
        k = np.clip(np.searchsorted(self.cumulative, u, side="left") - 1, 0, self.counts.size - 1)
        within = (u - self.cumulative[k]) / np.where(self.probabilities[k] > 0, self.probabilities[k], 1.0)
        return self.edges[k] + np.clip(within, 0.0, 1.0) * self.widths[k]

    def breakpoints(self) -> list[float]:
        return [float(x) for x in self.edges[1:-1]]

    def moment(self, k: int) -> float:
        if self.smooth:
            return super().moment(k)
        # Uniform within each bin: E[T^k] = sum_i p_i (b^(k+1) - a^(k+1)) / ((k+1)(b - a)).
        a, b = self.edges[:-1], self.edges[1:]
        return float(np.sum(self.probabilities * (b ** (k + 1) - a ** (k + 1)) / ((k + 1) * (b - a))))

    def formula(self) -> str:
        return ("F(t): monotone cubic through the cumulative bin shares" if self.smooth
                else "f(t) = p_i / width_i inside bin i")

    def describe(self) -> str:
        n = self.counts.sum()
        how = ("a smooth density (monotone cubic CDF through the cumulative shares, so every bin keeps "
               "its share exactly)" if self.smooth else "uniform within each bin")
        return (f"Binned field failures: {n:g} failures in {self.counts.size} bins from "
                f"{self.edges[0]:g} to {self.edges[-1]:g}, {how}.\n{self.formula()}\n"
                "Counts stand for the whole population only if every unit's failure would be "
                "recorded; no mass is placed beyond the last edge.")

    def spec(self) -> dict:
        return {"kind": "histogram", "edges": self.edges.tolist(), "counts": self.counts.tolist(),
                "smooth": self.smooth}


class ProductLimitTarget(Target):
    """Failure times with suspensions.

    Inside the observed range the law is the product-limit estimate: atoms at the
    distinct failure times. When the largest observation is a suspension, the
    mass the estimate leaves (R at the last failure) goes to a tail beyond it: a
    Weibull fitted by censored maximum likelihood to all the data, conditioned on
    survival to the last observation.
    """

    kind = "failures"
    exact_quantile = True

    def __init__(self, times: Sequence[float], censored: Sequence[bool] | None = None):
        times = _vector("times", times)
        neg = np.flatnonzero(times < 0)
        if neg.size:
            i = int(neg[0])
            raise ModelError("times", f"value {i + 1} is negative ({times[i]:g}); ages are >= 0")
        # Text ("no"), NaN or 2 is not a flag: refused, not read as a suspension.
        cens = censoring_flags("censored", censored, times.size)
        if cens.all():
            raise ModelError("censored", "every unit is a suspension; at least one failure is needed")
        self.times = times
        self.censored = cens
        order = np.lexsort((cens, times))  # failures before suspensions at tied times (convention)
        t_sorted, c_sorted = times[order], cens[order]
        n = t_sorted.size
        at_risk = n - np.arange(n)
        # Deaths d_i at each distinct failure time and units at risk n_i just before it,
        # both from the sorted ages: O(n log n) in all (the sort), no pass per failure time.
        fail_times, d = np.unique(t_sorted[~c_sorted], return_counts=True)
        # S(t_j) = prod over failure times t_i <= t_j of (1 - d_i / n_i)   (Kaplan-Meier 1958)
        first_index = np.searchsorted(t_sorted, fail_times, side="left")
        n_risk = at_risk[first_index]
        survival = np.cumprod(1.0 - d / n_risk)
        self.failure_times = fail_times
        self.at_risk = n_risk
        self.deaths = d
        self.km_survival = survival
        self.last_time = float(t_sorted[-1])
        self.tail_mass = float(survival[-1]) if c_sorted[-1] else 0.0
        if self.tail_mass < 1e-15:
            self.tail_mass = 0.0
        masses = -np.diff(np.concatenate([[1.0], survival]))
        self._atom_p = masses
        self.atoms = fail_times.copy()
        self.tail = None
        self.tail_fit = None
        hi = float(fail_times[-1])
        if self.tail_mass > 0:
            from .fitting import fit_family
            try:
                fit = fit_family("weibull", times, cens)
            except ModelError:
                # Too few failures for two parameters: a constant-rate tail
                # (one parameter) is the most the data can support.
                fit = fit_family("exponential", times, cens)
            self.tail_fit = fit
            self.tail = fit.given_survival(self.last_time)
            hi = math.inf
        # Cumulative F just after each atom, for exact inversion.
        self._F_at = 1.0 - survival
        super().__init__((0.0, hi), {"failures": int((~cens).sum()), "suspensions": int(cens.sum())})
        self.atoms = fail_times.copy()

    def atom_masses(self):
        return list(zip(self.atoms.tolist(), self._atom_p.tolist()))

    def _km_F(self, t):
        k = np.searchsorted(self.failure_times, t, side="right")
        return np.concatenate([[0.0], self._F_at])[k]

    def _cdf(self, t):
        F = self._km_F(t)
        if self.tail is None:
            return F
        beyond = t > self.last_time
        tail_F = 1.0 - self.tail_mass * self.tail.sf(np.maximum(t - self.last_time, 0.0))
        return np.where(beyond, tail_F, F)

    def _sf(self, t):
        S = 1.0 - self._km_F(t)
        if self.tail is None:
            return np.maximum(S, 0.0)
        beyond = t > self.last_time
        return np.where(beyond, self.tail_mass * self.tail.sf(np.maximum(t - self.last_time, 0.0)), S)

    def cdf(self, t):
        # Atoms sit inside the support, so F must include the atom at t itself:
        # the generic open-interval mask would drop the last atom at the upper end.
        t = np.asarray(t, dtype=float)
        out = np.where(t < 0, 0.0, self._cdf(np.maximum(t, 0.0)))
        return out if out.ndim else float(out)

    def sf(self, t):
        t = np.asarray(t, dtype=float)
        out = np.where(t < 0, 1.0, self._sf(np.maximum(t, 0.0)))
        return out if out.ndim else float(out)

    def _pdf(self, t):
        # Density of the continuous part only (the tail); atoms are in atom_masses().
        if self.tail is None:
            return np.zeros_like(t)
        return np.where(t > self.last_time, self.tail_mass * self.tail.pdf(t - self.last_time), 0.0)

    def _quantile(self, u):
        u = np.asarray(u, dtype=float)
        # Smallest failure time whose F reaches u; a small allowance absorbs the
        # rounding of the cumulative product.
        k = np.searchsorted(self._F_at, u - 1e-15, side="left")
        k = np.clip(k, 0, self.failure_times.size - 1)
        x = self.failure_times[k]
        if self.tail is None:
            return x
        in_tail = u > 1.0 - self.tail_mass
        if np.any(in_tail):
            v = np.clip((1.0 - u[in_tail]) / self.tail_mass, 0.0, 1.0)
            x = x.copy()
            x[in_tail] = self.last_time + self.tail.isf(v)
        return x

    def moment(self, k: int) -> float:
        total = float(np.sum(self._atom_p * self.atoms**k))
        if self.tail is not None:
            # E[T^k ; T > last] = tail_mass * E[(last + X)^k], X the residual life.
            m = sum(math.comb(k, j) * self.last_time ** (k - j) * self.tail.moment(j) for j in range(k + 1))
            total += self.tail_mass * m
        return total

    def formula(self) -> str:
        return "R(t) = prod over failure times t_i <= t of (1 - d_i/n_i)"

    def describe(self) -> str:
        nf, ns = int((~self.censored).sum()), int(self.censored.sum())
        text = [f"Product-limit (Kaplan-Meier) estimate from {nf} failure{'s' * (nf != 1)} and {ns} suspension{'s' * (ns != 1)}, "
                f"ages {self.times.min():g} to {self.last_time:g}.", self.formula()]
        if self.tail is not None:
            p = self.tail_fit.params
            shape = (f"a Weibull tail (shape {p['shape']:.4g}, scale {p['scale']:.4g}" if "shape" in p
                     else f"an exponential tail (mean {p['scale']:.4g}; too few failures for a Weibull")
            text.append(f"Beyond the last observation (a suspension at {self.last_time:g}) the remaining "
                        f"{self.tail_mass:.1%} of units follow {shape}, censored maximum likelihood on all "
                        f"the data) conditioned on survival to {self.last_time:g}: an extrapolation beyond "
                        "the data.")
        else:
            text.append("The last observation is a failure, so the estimate reaches R = 0 there; "
                        "no unit is drawn beyond it.")
        return "\n".join(text)

    def spec(self) -> dict:
        return {"kind": "failures", "times": self.times.tolist(), "censored": self.censored.tolist()}
