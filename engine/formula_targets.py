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
from .numeric import (CumulativeIntegral, SupportMap, divergence_reason, invert_monotone, log_age_map,
                      support_map)
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


def _on_support(t: np.ndarray, support) -> bool:
    """True for a 1-d array of ages in [lo, hi] with no NaN: where ``cdf_or_sf`` needs no masking."""
    lo, hi = support
    # Two reductions, no temporaries (a NaN makes min or max NaN, and the test False).
    return t.ndim == 1 and t.size > 0 and bool(t.min() >= lo) and bool(t.max() <= hi)


# Where the validity probes go: fractions of a finite support (log-spaced next to the ends), or
# offsets from a finite end of an infinite one. Fixed numbers, made once.
_PROBE_FRACTIONS = np.concatenate([np.logspace(-12, -1, 23), np.linspace(0.1, 0.9, 33), 1 - np.logspace(-1, -12, 23)])
_PROBE_FRACTIONS.setflags(write=False)
_PROBE_OFFSETS = np.logspace(-9, 9, 73)
_PROBE_OFFSETS.setflags(write=False)


def _series_edges(integral: CumulativeIntegral):
    """The ages at the edges of an integral's series (finite, increasing), the integral below each
    and above each: what the series holds without evaluating anything."""
    series = integral.series()
    ages = integral.mapping.to_t(series.edges)
    below = np.concatenate([series.before, [integral.total]])
    above = np.concatenate([[integral.total], series.after])
    finite = np.isfinite(ages)
    ages, below, above = ages[finite], below[finite], above[finite]
    rising = np.concatenate([[True], np.diff(ages) > 0])
    return ages[rising], below[rising], above[rising]


def _probe_points(lo: float, hi: float) -> np.ndarray:
    """Ages spread over the support (log-spaced next to the ends) for validity probes."""
    fractions = _PROBE_FRACTIONS
    if np.isfinite(lo) and np.isfinite(hi):
        return lo + (hi - lo) * fractions
    offsets = _PROBE_OFFSETS
    if np.isfinite(lo):
        return lo + offsets
    if np.isfinite(hi):
        return hi - offsets
    return np.concatenate([-offsets[::-1], [0.0], offsets])


# R = exp(-H) is below 2**-53 (the spacing of doubles below 1, so below anything a
# uniform draw resolves) once H > 36.7; H > 40 leaves < 4.3e-18 of the units.
H_NEGLIGIBLE = 40.0
# The farthest age (past the start of life) that the hazard path follows H to.
MAX_AGE_SPAN = 1e300
# Decades of age (from 1e-12 past the start) scanned first for where H passes the underflow.
FIRST_DECADES = 40


class _Reach:
    """Where a cumulative hazard passes the underflow of exp(-H) (or the largest usable age)."""

    def __init__(self, end: float, limit: float, lo: float, scale: float):
        self.end, self.limit, self.lo, self.scale = end, limit, lo, scale

    def far(self, end: float) -> bool:
        # Beyond ~10^6 scales a linear map of [lo, end] cannot resolve the bulk.
        return end - self.lo > 1e6 * self.scale

    def mapping(self, end: float, density) -> SupportMap:
        if self.far(end):
            return log_age_map(self.lo, end, self.scale, density)
        return support_map(self.lo, end, density=density)


def _cumulative_hazard_reach(h, lo: float, hi: float) -> _Reach:
    """Bracket the age where H(t) = integral of h from lo passes the underflow of exp(-H).

    H is summed by the trapezoid rule in log-age, H = integral of (t - lo)·h(t) d ln(t - lo),
    on a grid of 20 points per decade out to the declared end or 1e300 past the start,
    so H growing like log t (Lomax, log-logistic) is followed as far as doubles reach; the
    first 40 decades are scanned first, and the rest only if H has not passed the underflow
    by then (a hazard is then not examined where no unit survives: its sign there, or a
    breakdown that would only have lowered ``limit``, the end that a slowly rising H may be
    followed to, do not matter once H is past the underflow).
    A hazard that overflows to NaN (inf/inf) where no unit survives (H > 40) ends the
    support there. If H stays below the underflow level, ``_levelled_off`` decides
    whether H grows without bound (accepted while R at the largest age is negligible)
    or tends to a finite limit (refused: a share exp(-limit) of units would never fail).
    """
    # Ages up to 1e300 past the start: far enough for any H that grows like log t
    # with a practical coefficient, near enough that dt/dy of the log-age map stays finite.
    top = min(hi - lo, MAX_AGE_SPAN)
    full_span = top == MAX_AGE_SPAN
    exponents = _FULL_SPAN_EXPONENTS if full_span else _scan_exponents(top)
    # The scan runs in two stages over the same grid: the first FIRST_DECADES decades, where the
    # cumulative hazard of a practical model passes the underflow (and the scan stops there, as
    # nothing beyond the first crossing is used), then, only if it has not, the whole grid.
    for stop in (min(exponents.size, int(20 * FIRST_DECADES) + 1), exponents.size):
        whole = stop == exponents.size
        if full_span and not whole and stop == _FULL_SPAN_FIRST[0].size:
            offsets, log_steps = _FULL_SPAN_FIRST
        else:
            offsets, log_steps = _scan_offsets(exponents[:stop], top, whole)
        t, g, crude, usable = _log_age_scan(h, lo, offsets, log_steps)
        if whole or usable < stop or np.any(~(crude <= 2 * _H_UNDERFLOW)):
            break
    # The map's scale: where H reaches 1e-3, below which the law is nearly uniform in t.
    early = np.flatnonzero(crude > 1e-3)
    scale = float(t[early[0]] - lo) if early.size else float(t[-1] - lo)
    # Where the whole grid was scanned, ``usable`` counts its usable ages; where the first stage
    # crossed the underflow, the grid beyond it is not examined (no unit survives there).
    unbroken = usable == stop
    limit = hi if hi - lo <= MAX_AGE_SPAN and unbroken else (float(t[-1]) if whole or not unbroken else lo + top)
    # The trapezoid in log-age is only a bracket: stay past twice the underflow level.
    over = np.flatnonzero(~(crude <= 2 * _H_UNDERFLOW))
    if over.size:
        return _Reach(float(t[over[0]]), limit, lo, scale)
    if hi - lo <= MAX_AGE_SPAN and unbroken:
        return _Reach(hi, hi, lo, scale)

    def accurate_H():
        return CumulativeIntegral(h, log_age_map(lo, float(t[-1]), scale, h), rtol=1e-12).total

    _levelled_off(t - lo, g, float(crude[-1]), float(t[-1]), accurate_H)
    return _Reach(float(t[-1]), limit, lo, scale)


def _scan_exponents(top: float) -> np.ndarray:
    """The decades of the scan: from 1e-12 past the start (or 12 decades below ``top``) up to ``top``,
    20 points a decade."""
    first = min(-12.0, math.log10(top) - 12.0)
    return np.linspace(first, math.log10(top), int(20 * (math.log10(top) - first)) + 1)


def _scan_offsets(exponents, top: float, whole: bool):
    """The ages past the start, 10**exponents (the last one ``top`` itself on the whole grid), and the
    steps of their logarithms."""
    offsets = np.power(10.0, exponents)
    if whole:
        offsets[-1] = top
    return offsets, np.diff(np.log(offsets))


# The scan of a support that reaches MAX_AGE_SPAN past the start (every infinite one) is the same
# grid for every model: its exponents, and the offsets and log-steps of its first stage, made once.
_FULL_SPAN_EXPONENTS = _scan_exponents(MAX_AGE_SPAN)
_FULL_SPAN_FIRST = _scan_offsets(_FULL_SPAN_EXPONENTS[:int(20 * FIRST_DECADES) + 1], MAX_AGE_SPAN, False)
for _fixed in (_FULL_SPAN_EXPONENTS, *_FULL_SPAN_FIRST):
    _fixed.setflags(write=False)


def _log_age_scan(h, lo: float, offsets, log_steps):
    """h on the ages lo + offsets and H by the trapezoid rule in log-age (see
    ``_cumulative_hazard_reach``; ``log_steps`` the steps of log(offsets)): the ages,
    g = (t - lo)·h(t), H and how many ages are usable."""
    t = lo + offsets
    with np.errstate(all="ignore"):
        values = np.asarray(h(t), dtype=float)
    if values.shape != t.shape:                # a hazard that does not depend on t
        values = values * np.ones_like(t)
    with np.errstate(all="ignore"):
        g = offsets * values                   # hazard per unit of log-age
        pieces = 0.5 * (g[1:] + g[:-1]) * log_steps
        crude = np.concatenate([[g[0]], g[0] + np.cumsum(pieces)])
    negative = np.flatnonzero(values < 0)
    if negative.size:
        i = int(negative[0])
        raise ModelError("formula", f"the hazard rate is negative at t = {t[i]:.6g} (value {values[i]:.6g}); "
                                    "it must be finite and >= 0")
    # The formula breaks down numerically (inf/inf -> NaN, an overflowing denominator -> 0,
    # an underflowing one -> inf) only far out; a breakdown where H > 40 (< 4.3e-18 of the
    # units left) ends the support there. A smooth decay to 0 (exp(-t/100)) is no
    # breakdown: it fades first.
    with np.errstate(all="ignore"):
        running = np.maximum.accumulate(np.where(np.isnan(g), 0.0, g))
        abrupt = ~np.isfinite(values) | ((values == 0) & (np.concatenate([[0.0], g[:-1]]) > 1e-10 * running))
    usable = t.size
    broken = np.flatnonzero(abrupt)
    if broken.size:
        i = int(broken[0])
        if i >= 2 and crude[i - 2] > H_NEGLIGIBLE:
            usable = i - 1
        elif np.isnan(values[i]):
            raise ModelError("formula", f"the hazard rate is not a number at t = {t[i]:.6g}; "
                                        "it must be finite and >= 0")
    return t[:usable], g[:usable], crude[:usable], usable


def _levelled_off(offsets, g, H_top: float, t_top: float, accurate_H) -> None:
    """Refuse a cumulative hazard that tends to a finite limit, or grows too slowly for doubles.

    H grows without bound when g = (t - lo)·h(t) does not fall over the upper half of the
    log-age grid (g tends to a constant for log growth, grows for faster growth). If it
    falls, H tends to a finite limit, estimated by extrapolating g's decay as a power of
    t: limit = H(T) + g(T)/eps with eps = -d ln g / d ln t, H(T) integrated accurately.
    Limits above the underflow level leave no unit that double precision can count, so they pass.
    """
    s = np.log(offsets)
    mid = int(np.searchsorted(s, 0.5 * (s[0] + s[-1])))
    g_mid, g_top = float(g[mid]), float(g[-1])
    if H_top == 0.0:
        raise ModelError("formula", "the hazard rate is 0 on the whole support: units never fail")
    if g_top == 0.0 or g_top < g_mid * (1.0 - 1e-9):
        H_top = accurate_H()
        if g_top > 0:
            eps = math.log(g_mid / g_top) / (s[-1] - s[mid])
            limit = H_top + g_top / eps
        else:
            limit = H_top
        if limit < _H_UNDERFLOW:
            raise ModelError("formula", f"the cumulative hazard levels off: H(t) tends to about {limit:.6g} "
                                        f"(H = {H_top:.6g} at t = {t_top:.3g}), so a share exp(-{limit:.4g}) = "
                                        f"{math.exp(-limit):.3g} of units would never fail; a lifetime model "
                                        "needs H(t) to grow without bound")
        return
    if H_top < H_NEGLIGIBLE:
        raise ModelError("formula", f"the cumulative hazard grows too slowly for double precision: H = "
                                    f"{H_top:.4g} at t = {t_top:.3g}, the farthest age followed, so a "
                                    f"share {math.exp(-H_top):.3g} of units would outlive t = {t_top:.3g}")


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
        far = np.isfinite(hi) and not self.mapping.log_span > 0
        width = (hi - lo) if far else max(self.mapping.scale, 1e-300)
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
        why = divergence_reason(lambda t: self._raw(t), lo, hi)
        if why:
            raise ModelError("formula", why)
        peak = float(np.max(values))
        if peak < 1e-280 or peak > 1e280:
            # Near the ends of double precision the values lose their digits (1e-320 keeps
            # three): refuse rather than normalise noise. The scale itself is irrelevant.
            raise ModelError("formula", f"the density's values are of order {peak:.3g}, too near the limits of "
                                        "double precision to compute with; multiply the formula by a constant "
                                        "that brings them near 1 (a density is normalised, so the scale is free)")
        # The bound formula's values have the shape of t already (Formula broadcasts a constant).
        self._map = support_map(lo, hi, density=self._raw)
        self.integral = CumulativeIntegral(
            self._raw, self._map, field="formula",
            check=lambda t, g: self._values_ok(t, g, "density"), map_of_integrand=True)
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

    def cdf_or_sf(self, t, upper):
        t = np.asarray(t, dtype=float)
        if not _on_support(t, self.support):
            return super().cdf_or_sf(t, upper)
        # One pass of the integral, each point on its own side (at lo: F = 0, R = total/area = 1;
        # at hi: F = 1, R = 0).
        with np.errstate(all="ignore"):
            return self.integral.sided(t, upper) / self.area

    def tabulated_cdf_sf(self):
        """F and R at the edges of the series of the density's integral (the masses below and above
        each edge, divided by the area)."""
        ages, below, above = _series_edges(self.integral)
        return ages, below / self.area, above / self.area

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
    """A hazard-rate formula h(t); R(t) = exp(-H(t)), f = h·R.

    Any hazard whose cumulative hazard grows without bound is a lifetime model,
    however slowly H grows (like log t for the Lomax and log-logistic hazards).
    The support ends where R(t) = exp(-H(t)) underflows, or 1e300 past the start
    of life; a hazard whose H levels off is refused, with its limit.
    """

    kind = "hazard"

    def __init__(self, expr: str, support=(0.0, math.inf), params: Mapping[str, float] | None = None):
        super().__init__(expr, support, params or {})
        lo, hi = self.support
        if not np.isfinite(lo):
            raise ModelError("support", "a hazard-rate model needs a finite start of life "
                                        "(the cumulative hazard is counted from there)")

        def h(t):
            return self._raw(t)      # the shape of t (Formula broadcasts a constant)

        self.declared_support = (lo, hi)
        reach = _cumulative_hazard_reach(h, lo, hi)
        end = reach.end
        # Beyond the effective end R(t) = 0, so the hazard may overflow there.
        probe = _probe_points(lo, end)
        with np.errstate(all="ignore"):
            values = np.asarray(h(probe), dtype=float)
        self._values_ok(probe, values, "hazard rate")
        while True:
            # R = exp(-H) and F = -expm1(-H) read H from the start of life only (upper_sums=False).
            self.H = CumulativeIntegral(h, reach.mapping(end, h), rtol=1e-14, field="formula",
                                        check=lambda t, g: self._values_ok(t, g, "hazard rate"),
                                        upper_sums=False, map_of_integrand=True)
            # The rough bracket can fall short for a decreasing hazard: push on
            # until R(end) is negligible (H > 40 leaves < 5e-18 of the units).
            if self.H.total >= H_NEGLIGIBLE or end >= reach.limit or end - lo > 1e300:
                break
            end = min(lo + 4.0 * (end - lo), reach.limit)
        self.effective_end = end
        if not self.H.total > 0:
            raise ModelError("formula", "the hazard rate is 0 on the whole support: units never fail")
        if self.H.total < 36.0 and end == hi:
            raise ModelError("formula", f"the cumulative hazard reaches only H = {self.H.total:.4g} by "
                                        f"the end of the support (t = {hi:g}), so {math.exp(-self.H.total):.2%} "
                                        "of units would never fail; extend the support or check the formula")
        # The support ends where R(t) underflows; beyond it no unit survives.
        self.support = (lo, end)
        self._h = h
        self._map = reach.mapping(end, self.pdf) if reach.far(end) else None
        self.pole_at_lower = self._pole_check(h)

    def moment(self, k: int) -> float:
        """E[T^k] = lo^k + integral of k·t^(k-1)·R(t) dt (integration by parts, t >= 0),
        on the hazard's own map, so heavy tails (R ~ t^-b) keep their digits; inf
        where t^k·R(t) does not die out over the far decades of the support."""
        lo, end = self.support
        if k == 0:
            return 1.0
        if lo < 0 or k < 1:
            return super().moment(k)

        def weight(t):
            t = np.asarray(t, dtype=float)
            with np.errstate(all="ignore"):
                return k * np.exp((k - 1) * np.log(t) - self.cumulative_hazard(t))

        if self.mapping.log_span > 0:
            # Per unit of log-age, the far end must weigh nothing beside the median.
            median = float(self.quantile(0.5))
            last = lo + (end - lo) * (1.0 - 1e-9)
            if last * weight(last) > 1e-12 * median * weight(median):
                return math.inf
        total = CumulativeIntegral(weight, self.mapping, rtol=1e-13, field="formula").total
        return float(lo**k + total) if np.isfinite(total) else math.inf

    def cdf_or_sf(self, t, upper):
        t = np.asarray(t, dtype=float)
        if not _on_support(t, self.support):
            return super().cdf_or_sf(t, upper)
        # One pass of H for both sides (H(lo) = 0: F = 0, R = 1 there); at the end of the support,
        # where R(t) underflows, F = 1 and R = 0 as ``cdf`` and ``sf`` give.
        upper = np.broadcast_to(np.asarray(upper, dtype=bool), t.shape)
        with np.errstate(all="ignore"):
            minus_H = np.negative(self.H(t))
            # Each point's side only: R = exp(-H) where ``upper``, F = -expm1(-H) elsewhere.
            out = np.exp(minus_H, where=upper, out=np.empty(t.shape))
            lower = ~upper
            np.expm1(minus_H, where=lower, out=out)
            np.negative(out, where=lower, out=out)
        end = np.flatnonzero(t >= self.support[1])
        if end.size:
            out[end] = np.where(upper[end], 0.0, 1.0)
        return out

    def tabulated_cdf_sf(self):
        """F = 1 - exp(-H) and R = exp(-H) at the edges of the series of H (H below each edge)."""
        ages, H, _ = _series_edges(self.H)
        inside = ages <= self.support[1]
        return ages[inside], -np.expm1(-H[inside]), np.exp(-H[inside])

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
        self._check_dense()
        self.pole_at_lower = self._pole_check(self._d)
        d2 = self.expression.derivative().derivative().bind(**self.params)
        self._d2 = lambda t: d2(t) * np.ones_like(np.asarray(t, dtype=float))

    def _dpdf_exact(self):
        return self._d2

    def _check_dense(self, points: int = 20001) -> None:
        """A narrow dip or a jump slips between the coarse probes: look again on a dense grid
        spread by the support map, with the exact derivative (F' >= 0) and bisection of big steps."""
        y0, y1 = self._map.y_range
        y = np.linspace(y0, y1, points)[1:-1]
        t = np.unique(self._map.to_t(y))
        t = t[np.isfinite(t)]
        with np.errstate(all="ignore"):
            F = np.asarray(self._raw(t), dtype=float) * np.ones_like(t)
            d = np.asarray(self._d(t), dtype=float)
        finite = np.isfinite(d)
        peak = float(np.max(np.abs(d[finite]))) if finite.any() else 0.0
        falling = np.flatnonzero(finite & (d < -1e-9 * peak))
        if falling.size:
            tb = t[falling[0]]
            raise ModelError("formula", f"the CDF decreases near t = {tb:.6g} (its derivative is {d[falling[0]]:.3g} "
                                        "there); a CDF never decreases")
        # Steps of more than 1e-4 in F between neighbours: halve them; a continuous F's step
        # shrinks with the interval, a jump's does not.
        big = np.flatnonzero(np.diff(F) > 1e-4)
        if big.size:
            a, b = t[big], t[big + 1]
            Fa, Fb = F[big], F[big + 1]
            for _ in range(80):
                m = 0.5 * (a + b)
                with np.errstate(all="ignore"):
                    Fm = np.asarray(self._raw(m), dtype=float) * np.ones_like(m)
                left = (Fm - Fa) >= (Fb - Fm)          # keep the half holding the larger step
                a, b = np.where(left, a, m), np.where(left, m, b)
                Fa, Fb = np.where(left, Fa, Fm), np.where(left, Fm, Fb)
            jump = np.flatnonzero((Fb - Fa) > 1e-6)
            if jump.size:
                i = int(jump[0])
                raise ModelError("formula", f"the CDF jumps by {Fb[i] - Fa[i]:.4g} at t = {a[i]:.6g}; a CDF formula "
                                            "must be continuous (a jump means a share of units failing at one "
                                            "age, which a CDF formula cannot carry)")

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
