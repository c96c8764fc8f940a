"""Targets written as formulas: a density (unnormalised allowed), a hazard rate,
or a cumulative distribution function, in lifedraw's whitelisted formula language.

The hazard route uses f(t) = h(t)·exp(-H(t)) with H(t) the integral of h from
the start of life (NIST/SEMATECH e-Handbook 8.1.2.3 and 8.1.2.4).
"""
from __future__ import annotations

import math
from typing import Mapping

import numpy as np

from .errors import ModelError, finite_number
from .formula import Formula
from .numeric import CumulativeIntegral, SupportMap, invert_monotone, support_map
from .target import Target

# Cumulative hazard beyond which R(t) = exp(-H) underflows in double precision.
_H_UNDERFLOW = 745.0


def _check_support(support) -> tuple[float, float]:
    try:
        lo, hi = (float(x) for x in support)
    except (TypeError, ValueError):
        raise ModelError("support", f"must be two numbers (lo, hi), got {support!r}") from None
    if math.isnan(lo) or math.isnan(hi):
        raise ModelError("support", "ends must be numbers, not NaN")
    if not lo < hi:
        raise ModelError("support", f"the lower end must be below the upper end, got ({lo:g}, {hi:g})")
    return lo, hi


def _check_params(params: Mapping[str, float]) -> dict[str, float]:
    if not isinstance(params, Mapping):
        raise ModelError("params", "must be a table of name = number")
    return {str(k): finite_number(str(k), v) for k, v in params.items()}


def _probe_points(lo: float, hi: float) -> np.ndarray:
    """Ages spread over the support (log-spaced next to the ends) for validity probes."""
    fractions = np.concatenate([np.logspace(-12, -1, 23), np.linspace(0.1, 0.9, 33),
                                1 - np.logspace(-1, -12, 23)])
    if np.isfinite(lo) and np.isfinite(hi):
        return lo + (hi - lo) * fractions
    offsets = np.logspace(-9, 9, 73)
    if np.isfinite(lo):
        return lo + offsets
    if np.isfinite(hi):
        return hi - offsets
    return np.concatenate([-offsets[::-1], [0.0], offsets])


class _FormulaTarget(Target):
    what = "formula"

    def __init__(self, expr: str, support, params: Mapping[str, float]):
        lo, hi = _check_support(support)
        values = _check_params(params)
        self.expression = Formula.parse(expr, params=tuple(values), field="formula")
        unused = set(values) - self.expression.names()
        self.unused_params = sorted(unused)
        self._raw = self.expression.bind(**values)
        super().__init__((lo, hi), values)

    def _values_ok(self, t, values, name: str):
        """Reject non-finite or negative formula values, naming the first bad age."""
        bad = ~np.isfinite(values) | (values < 0)
        if np.any(bad):
            i = np.flatnonzero(bad.ravel())[0]
            tb = np.asarray(t, dtype=float).ravel()[i]
            vb = values.ravel()[i]
            kind = "negative" if np.isfinite(vb) and vb < 0 else "not finite"
            raise ModelError("formula", f"the {name} is {kind} at t = {tb:.6g} (value {vb:.6g}); "
                                        f"a {name} must be finite and >= 0 on the support")

    def _pole_check(self, fn) -> bool:
        lo, hi = self.support
        if not np.isfinite(lo):
            return False
        width = (hi - lo) if np.isfinite(hi) else max(self.mapping.scale, 1e-300)
        with np.errstate(all="ignore"):
            near = np.asarray(fn(lo + width * np.array([1e-12, 1e-9, 1e-6])), dtype=float)
        return bool(np.all(np.isfinite(near)) and near[0] > 10 * near[2] and near[0] > 10 * near[1] / 10)

    def _param_text(self) -> str:
        if not self.params:
            return ""
        return " with " + ", ".join(f"{k} = {v:.6g}" for k, v in self.params.items())

    def formula(self) -> str:
        return self.expression.text

    def spec(self) -> dict:
        return {"kind": self.kind, "expr": self.expression.text,
                "support": [self.support[0], self.support[1]], "params": dict(self.params)}


class DensityTarget(_FormulaTarget):
    """f(t) proportional to a formula; the area is computed and reported."""

    kind = "density"

    def __init__(self, expr: str, support=(0.0, math.inf), params: Mapping[str, float] | None = None):
        super().__init__(expr, support, params or {})
        lo, hi = self.support
        probe = _probe_points(lo, hi)
        with np.errstate(all="ignore"):
            values = np.asarray(self._raw(probe), dtype=float) * np.ones_like(probe)
        self._values_ok(probe, values, "density")
        if not np.any(values > 0):
            raise ModelError("formula", "the density is 0 everywhere it was probed on the support; "
                                        "it has no area to normalise")
        self._map = support_map(lo, hi, density=lambda t: self._raw(t) * np.ones_like(t))
        self.integral = CumulativeIntegral(
            lambda t: self._raw(t) * np.ones_like(t), self._map, field="formula",
            check=lambda t, g: self._values_ok(t, g, "density"))
        area = self.integral.total
        if not (np.isfinite(area) and area > 0):
            raise ModelError("formula", f"the density's area on the support is {area:g}; "
                                        "it must be finite and > 0")
        self.area = float(area)
        self.pole_at_lower = self._pole_check(self._raw)

    def _pdf(self, t):
        return self._raw(t) * np.ones_like(t) / self.area

    def _cdf(self, t):
        return self.integral(t) / self.area

    def _sf(self, t):
        return self.integral.upper(t) / self.area

    def _dpdf_exact(self):
        """f'(t) as a vectorised function (exact, from the formula's derivative)."""
        d = self.expression.derivative().bind(**self.params)
        return lambda t: d(t) * np.ones_like(np.asarray(t, dtype=float)) / self.area

    def describe(self) -> str:
        lo, hi = self.support
        note = "" if abs(self.area - 1) < 1e-9 else f" (area before normalising: {self.area:.6g})"
        return (f"Density written as a formula on ({lo:g}, {hi:g}){self._param_text()}{note}.\n"
                f"f(t) ∝ {self.expression.text}")


class HazardTarget(_FormulaTarget):
    """A hazard-rate formula h(t); R(t) = exp(-H(t)), f = h·R."""

    kind = "hazard"

    def __init__(self, expr: str, support=(0.0, math.inf), params: Mapping[str, float] | None = None):
        super().__init__(expr, support, params or {})
        lo, hi = self.support
        if not np.isfinite(lo):
            raise ModelError("support", "a hazard-rate model needs a finite start of life "
                                        "(the cumulative hazard is counted from there)")

        def h(t):
            return self._raw(t) * np.ones_like(t)

        self.declared_support = (lo, hi)
        end = self._effective_end(h, lo, hi)
        # Beyond the effective end R(t) = 0, so the hazard may overflow there.
        probe = _probe_points(lo, end)
        with np.errstate(all="ignore"):
            values = np.asarray(h(probe), dtype=float)
        self._values_ok(probe, values, "hazard rate")
        while True:
            self.H = CumulativeIntegral(h, support_map(lo, end, density=h), rtol=1e-14, field="formula",
                                        check=lambda t, g: self._values_ok(t, g, "hazard rate"))
            # The rough bracket can fall short for a decreasing hazard: push on
            # until R(end) is negligible (H > 40 leaves < 5e-18 of the units).
            if self.H.total >= 40.0 or end >= hi or end - lo > 1e300:
                break
            end = min(lo + 4.0 * (end - lo), hi)
        self.effective_end = end
        if not self.H.total > 0:
            raise ModelError("formula", "the hazard rate is 0 on the whole support: units never fail")
        if self.H.total < 36.0 and end == hi:
            raise ModelError("formula", f"the cumulative hazard reaches only H = {self.H.total:.4g} by "
                                        f"the end of the support (t = {hi:g}), so {math.exp(-self.H.total):.2%} "
                                        "of units would never fail; extend the support or check the formula")
        # The support ends where R(t) underflows; beyond it no unit survives.
        self.support = (lo, end)
        self.pole_at_lower = self._pole_check(h)
        self._h = h

    @staticmethod
    def _effective_end(h, lo, hi) -> float:
        """First age where a rough cumulative hazard passes the underflow of exp(-H).

        A coarse trapezoid sum on a logarithmic grid only brackets that age;
        the accurate H is integrated afterwards on [lo, end].
        """
        if np.isfinite(hi):
            offsets = (hi - lo) * np.concatenate([np.logspace(-12, 0, 400)])
        else:
            offsets = np.logspace(-9, 15, 1200)
        t = lo + offsets
        with np.errstate(all="ignore"):
            values = np.asarray(h(t), dtype=float)
        if np.any(values < 0) or np.any(np.isnan(values)):
            i = int(np.flatnonzero((values < 0) | np.isnan(values))[0])
            raise ModelError("formula", f"the hazard rate is {'negative' if values[i] < 0 else 'not a number'} "
                                        f"at t = {t[i]:.6g} (value {values[i]:.6g}); it must be finite and >= 0")
        # An overflowing hazard (+inf) only says the units are long gone.
        steps = np.diff(np.concatenate([[lo], t]))
        # Left-point sums under-estimate an increasing hazard, so stay well past 745.
        crude = np.cumsum(values * steps)
        over = np.flatnonzero(crude > 4 * _H_UNDERFLOW)
        if over.size:
            return float(t[over[0]])
        if np.isfinite(hi):
            return hi
        raise ModelError("formula", f"the cumulative hazard stays below {crude[-1]:.4g} up to "
                                    f"t = {t[-1]:.3g}: a share of units would never fail; "
                                    "a lifetime model needs H(t) to grow without bound")

    def _sf(self, t):
        return np.exp(-self.H(t))

    def _cdf(self, t):
        return -np.expm1(-self.H(t))

    def _pdf(self, t):
        return self._h(t) * np.exp(-self.H(t))

    def _hazard(self, t):
        return self._h(t)

    def cumulative_hazard(self, t):
        t = np.asarray(t, dtype=float)
        out = np.where(t <= self.support[0], 0.0, np.where(t >= self.support[1], np.inf, 0.0))
        inside = (t > self.support[0]) & (t < self.support[1])
        if np.any(inside):
            out = np.asarray(out, dtype=float)
            out[inside] = self.H(t[inside])
        return out if out.ndim else float(out)

    def _dpdf_exact(self):
        dh = self.expression.derivative().bind(**self.params)

        def fprime(t):
            t = np.asarray(t, dtype=float)
            h = self._h(t)
            return (dh(t) * np.ones_like(t) - h * h) * np.exp(-self.H(t))
        return fprime

    def describe(self) -> str:
        lo, _ = self.support
        return (f"Hazard-rate formula from t = {lo:g}{self._param_text()}; R(t) = exp(-H(t)), "
                "H = integral of h, f(t) = h(t)·R(t).\n"
                f"h(t) = {self.expression.text}")

    def spec(self) -> dict:
        out = super().spec()
        out["support"] = list(self.declared_support)
        return out


class CdfTarget(_FormulaTarget):
    """A cumulative distribution formula F(t); the density is its exact derivative."""

    kind = "cdf"

    def __init__(self, expr: str, support=(0.0, math.inf), params: Mapping[str, float] | None = None):
        super().__init__(expr, support, params or {})
        lo, hi = self.support
        probe = np.sort(_probe_points(lo, hi))
        with np.errstate(all="ignore"):
            F = np.asarray(self._raw(probe), dtype=float) * np.ones_like(probe)
        if not np.all(np.isfinite(F)):
            i = int(np.flatnonzero(~np.isfinite(F))[0])
            raise ModelError("formula", f"the CDF is not finite at t = {probe[i]:.6g}")
        if np.any((F < -1e-12) | (F > 1 + 1e-12)):
            i = int(np.flatnonzero((F < -1e-12) | (F > 1 + 1e-12))[0])
            raise ModelError("formula", f"the CDF is {F[i]:.6g} at t = {probe[i]:.6g}; it must stay in [0, 1]")
        drops = np.flatnonzero(np.diff(F) < -1e-12)
        if drops.size:
            i = int(drops[0])
            raise ModelError("formula", f"the CDF decreases between t = {probe[i]:.6g} and "
                                        f"t = {probe[i + 1]:.6g}; a CDF never decreases")
        if F[0] > 1e-6:
            raise ModelError("formula", f"the CDF starts at {F[0]:.4g} at the lower end of the "
                                        "support; it must start at 0")
        if F[-1] < 1 - 1e-6:
            raise ModelError("formula", f"the CDF reaches only {F[-1]:.6g} at the upper end of the "
                                        "support; it must reach 1")
        d = self.expression.derivative().bind(**self.params)
        self._d = lambda t: d(t) * np.ones_like(np.asarray(t, dtype=float))
        self._map = support_map(lo, hi, density=self._d)
        self.pole_at_lower = self._pole_check(self._d)
        d2 = self.expression.derivative().derivative().bind(**self.params)
        self._d2 = lambda t: d2(t) * np.ones_like(np.asarray(t, dtype=float))

    def _dpdf_exact(self):
        return self._d2

    def _cdf(self, t):
        return np.clip(self._raw(t) * np.ones_like(t), 0.0, 1.0)

    def _sf(self, t):
        return 1.0 - self._cdf(t)

    def _pdf(self, t):
        return np.maximum(self._d(t), 0.0)

    def describe(self) -> str:
        lo, hi = self.support
        return (f"Cumulative distribution written as a formula on ({lo:g}, {hi:g}){self._param_text()}; "
                "the density is its exact derivative.\n"
                f"F(t) = {self.expression.text}")
