"""The lifetime model every sampler reproduces: ``Target`` and its constructors.

A Target is a probability law of age-at-failure ``t`` with pdf, cdf, sf,
hazard and quantile, vectorised over numpy arrays. Constructors build one from
a textbook family, a formula, field data, or a composition of other targets.
"""
from __future__ import annotations

import math
from typing import Iterable, Mapping, Sequence

import numpy as np
from scipy import integrate, optimize

from .errors import ModelError
from .numeric import SupportMap, invert_monotone, support_map


class Target:
    """Base class: a distribution of lifetimes on ``support = (lo, hi)``.

    Subclasses implement ``_pdf``, ``_cdf`` and ``_sf`` on points inside the
    support; closed forms for ``_quantile``, ``_hazard``, ``mean`` and the
    rest override the numerical defaults here. ``atoms`` lists points that
    carry probability mass (only targets built from failure records have any).
    """

    kind = "abstract"
    #: True where ``quantile`` is a closed form (or an exact finite construction).
    exact_quantile = False
    #: True where the density is unbounded at the lower end of the support.
    pole_at_lower = False

    def __init__(self, support: tuple[float, float], params: Mapping[str, float] | None = None):
        lo, hi = float(support[0]), float(support[1])
        if not lo < hi:
            raise ModelError("support", f"the lower end must be below the upper end, got ({lo:g}, {hi:g})")
        self.support = (lo, hi)
        self.params = dict(params or {})
        self.atoms = np.empty(0)
        self._map: SupportMap | None = None

    # ---- what subclasses provide -------------------------------------------------
    def _pdf(self, t):
        raise NotImplementedError

    def _cdf(self, t):
        raise NotImplementedError

    def _sf(self, t):
        return 1.0 - self._cdf(t)

    def _logpdf(self, t):
        with np.errstate(divide="ignore"):
            return np.log(self._pdf(t))

    def _hazard(self, t):
        with np.errstate(divide="ignore", invalid="ignore"):
            return self._pdf(t) / self._sf(t)

    def _quantile(self, u):
        return invert_monotone(self.cdf, self.sf, u, self.mapping, pdf=self.pdf)

    def formula(self) -> str:
        """The model written as a formula (plain text)."""
        return ""

    def describe(self) -> str:
        """Plain words plus the formula."""
        raise NotImplementedError

    def spec(self) -> dict:
        """A JSON/TOML-serialisable description that ``Target.from_spec`` rebuilds."""
        raise NotImplementedError

    # ---- public, vectorised --------------------------------------------------------
    def _masked(self, t, fn, below, above):
        t = np.asarray(t, dtype=float)
        lo, hi = self.support
        inside = (t > lo) & (t < hi)
        if t.ndim == 1 and inside.all():
            # Every point inside (the common case for a method's set-up): no gather and scatter.
            # fn gets its own copy, as it did through the gather, so no model can touch the caller's array.
            with np.errstate(all="ignore"):
                return np.array(fn(t.copy()), dtype=float)
        out = np.where(t <= lo, below, above).astype(float)
        if np.any(inside):
            with np.errstate(all="ignore"):
                out[inside] = fn(t[inside])
        out[np.isnan(t)] = np.nan
        return out if out.ndim else float(out)

    def pdf(self, t):
        """Probability density f(t); 0 outside the support."""
        return self._masked(t, self._pdf, 0.0, 0.0)

    def logpdf(self, t):
        return self._masked(t, self._logpdf, -np.inf, -np.inf)

    def dpdf(self, t):
        """f'(t). Exact where the model has a formula for it; otherwise a
        fourth-order central difference (relative accuracy about 1e-10)."""
        t = np.asarray(t, dtype=float)
        exact = self._dpdf_exact()
        if exact is not None:
            out = np.where((t > self.support[0]) & (t < self.support[1]), exact(t), 0.0)
            return out if out.ndim else float(out)
        lo, hi = self.support
        # Step ~ eps**(1/5) of the local length scale (optimal for this stencil):
        # the distance to a finite lower end (power-law behaviour there), capped
        # by the model's scale; never |t|, which is large under a big location.
        scale = self.mapping.scale
        local = np.minimum(np.maximum(t - lo, 1e-9 * scale), scale) if np.isfinite(lo) else scale
        h = 1e-3 * local
        # Keep the stencil inside the support.
        room = np.minimum(t - lo, hi - t) / 2.5
        h = np.where(np.isfinite(room), np.minimum(h, room), h)
        f = self.pdf
        d = (-f(t + 2 * h) + 8 * f(t + h) - 8 * f(t - h) + f(t - 2 * h)) / (12 * h)
        return d if np.ndim(d) else float(d)

    def _dpdf_exact(self):
        """A vectorised exact f'(t), if the model has one (formula models do)."""
        return None

    def cdf(self, t):
        """F(t) = P(T <= t), the probability of failure by age t."""
        return self._masked(t, self._cdf, 0.0, 1.0)

    def sf(self, t):
        """R(t) = P(T > t), the reliability (survival) function."""
        return self._masked(t, self._sf, 1.0, 0.0)

    def cdf_or_sf(self, t, upper):
        """F(t) where ``upper`` is False and R(t) where it is True (a flag per point), so each point
        is read on the side that keeps its digits; a model whose F and R come from one computation
        answers all points in one pass."""
        t = np.asarray(t, dtype=float)
        upper = np.broadcast_to(np.asarray(upper, dtype=bool), t.shape)
        out = np.empty(t.shape)
        if not upper.all():
            out[~upper] = self.cdf(t[~upper])
        if upper.any():
            out[upper] = self.sf(t[upper])
        return out

    def tabulated_cdf_sf(self):
        """(ages, F, R) at ages where the model has F and R already, without evaluating anything (a
        set-up's scan of the support reads them there), or None. Increasing, finite ages in the support."""
        return None

    def hazard(self, t):
        """h(t) = f(t)/R(t), the instantaneous failure rate."""
        return self._masked(t, self._hazard, 0.0, np.nan)

    def cumulative_hazard(self, t):
        """H(t) = -ln R(t)."""
        with np.errstate(divide="ignore"):
            return -np.log(self.sf(t))

    def quantile(self, u):
        """F^-1(u): the age by which a fraction u of units has failed."""
        u_arr = np.asarray(u, dtype=float)
        if np.any((u_arr < 0) | (u_arr > 1)):
            raise ModelError("u", "probabilities must lie in [0, 1]")
        lo, hi = self.support
        out = np.empty(u_arr.shape)
        flat_u = u_arr.ravel()
        flat = out.ravel()
        inner = (flat_u > 0) & (flat_u < 1)
        flat[flat_u <= 0] = lo
        flat[flat_u >= 1] = hi
        flat[np.isnan(flat_u)] = np.nan
        if np.any(inner):
            flat[inner] = self._quantile(flat_u[inner])
        out = flat.reshape(u_arr.shape)
        return out if out.ndim else float(out)

    def isf(self, v):
        """Inverse survival function: the age that a fraction v of units outlives."""
        v_arr = np.asarray(v, dtype=float)
        if np.any((v_arr < 0) | (v_arr > 1)):
            raise ModelError("v", "probabilities must lie in [0, 1]")
        out = np.asarray(self._isf(v_arr), dtype=float)
        return out if out.ndim else float(out)

    def _isf(self, v):
        v = np.asarray(v, dtype=float)
        if self.exact_quantile and not self.atoms.size:
            # A closed-form quantile at 1 - v is exact up to the rounding of 1 - v;
            # subclasses with a closed-form isf override this.
            return self.quantile(1.0 - v)
        return invert_monotone(self.cdf, self.sf, v, self.mapping, pdf=self.pdf, upper_tail=True)

    @property
    def mapping(self) -> SupportMap:
        if self._map is None:
            self._map = support_map(*self.support, density=self.pdf)
        return self._map

    # ---- moments ---------------------------------------------------------------------
    def moment(self, k: int) -> float:
        """Raw moment E[T^k] by adaptive quadrature (inf when it diverges)."""
        if k == 0:
            return 1.0
        lo, hi = self.support
        pieces = self._quadrature_breaks()
        total = 0.0
        for a, b in zip(pieces[:-1], pieces[1:]):
            with np.errstate(all="ignore"):
                value, err, *rest = integrate.quad(lambda x: x**k * float(self.pdf(x)), a, b,
                                                   limit=400, full_output=1)
            if rest and len(rest) >= 2 and ("divergent" in str(rest[1]).lower()
                                             or not np.isfinite(value)):
                return math.inf
            total += value
        for atom_t, atom_p in self.atom_masses():
            total += atom_p * atom_t**k
        if not np.isfinite(total) or abs(total) > 1e300:
            return math.inf
        # A moment that only "converges" because quad gave up is divergent.
        if self._tail_too_heavy(k):
            return math.inf
        return float(total)

    def _tail_too_heavy(self, k: int) -> bool:
        """Is t^k f(t) non-integrable at an infinite end? (tail decays like t^-(k+1) or slower)."""
        lo, hi = self.support
        for end in (hi, lo):
            if np.isfinite(end):
                continue
            sign = 1.0 if end > 0 else -1.0
            big = sign * np.array([1e6, 1e9, 1e12]) * max(1.0, self.mapping.scale)
            with np.errstate(all="ignore"):
                tail = self.sf(big) if sign > 0 else self.cdf(big)
            weighted = np.abs(big) ** k * tail
            if weighted[-1] > 1e-9 and weighted[-1] >= 0.5 * weighted[0]:
                return True
        return False

    def _quadrature_breaks(self):
        lo, hi = self.support
        q = self.quantile(np.array([1e-9, 0.01, 0.25, 0.5, 0.75, 0.99, 1 - 1e-9]))
        inner = [x for x in np.unique(q) if lo < x < hi and np.isfinite(x)]
        return [lo, *inner, hi]

    def atom_masses(self) -> list[tuple[float, float]]:
        """(point, probability) for each atom; empty for continuous targets."""
        return []

    def mean(self) -> float:
        """Mean time to failure (MTTF)."""
        return self.moment(1)

    def var(self) -> float:
        m1 = self.mean()
        if not np.isfinite(m1):
            return math.inf
        m2 = self.moment(2)
        if not np.isfinite(m2):
            return math.inf
        # Centre first where the moments nearly cancel.
        return max(m2 - m1 * m1, 0.0)

    def mode(self) -> float:
        """Location of the density's maximum (the lower end for a pole there)."""
        if self.pole_at_lower:
            return self.support[0]
        q = self.quantile(np.linspace(0.0005, 0.9995, 801))
        lo, hi = self.support
        grid = np.unique(np.concatenate([q, [lo] if np.isfinite(lo) else [], [hi] if np.isfinite(hi) else []]))
        values = self.pdf(grid)
        k = int(np.nanargmax(values))
        a, b = grid[max(k - 1, 0)], grid[min(k + 1, grid.size - 1)]
        if b <= a:
            return float(grid[k])
        res = optimize.minimize_scalar(lambda x: -float(self.pdf(x)), bounds=(a, b), method="bounded",
                                       options=dict(xatol=1e-12 * max(1.0, abs(b))))
        return float(res.x) if -res.fun >= values[k] else float(grid[k])

    # ---- composition and constructors -------------------------------------------------
    def given_survival(self, age: float) -> "Target":
        """Residual life of a unit that has survived to ``age`` (support starts at 0)."""
        from .composite import ResidualTarget
        return ResidualTarget(self, age)

    def __repr__(self) -> str:
        return f"<{type(self).__name__} {self.formula() or self.kind} on {self.support}>"


# ---- deprecated constructors (one release) ----------------------------------------------
# Model constructors are functions of the package now (``lifedraw.family``, ...). The old
# class-level names still work and warn. ``Target.hazard`` served both as the hazard-formula
# constructor (on the class) and as h(t) (on an instance); the small descriptor below exists only
# to keep the old class-level call working during the deprecation and goes with it.

_RENAMED = {"family": "family", "density": "density_formula", "hazard_rate": "hazard_formula",
            "cdf_formula": "cdf_formula", "histogram": "binned_counts", "failures": "failure_times",
            "mixture": "mixture", "competing": "competing", "from_spec": "from_spec"}


def _deprecated_constructor(old: str, new: str):
    def constructor(*args, **kwargs):
        import warnings
        from . import models
        warnings.warn(f"Target.{old}(...) is deprecated and will be removed in the next release; "
                      f"use lifedraw.{new}(...)", DeprecationWarning, stacklevel=2)
        return getattr(models, new)(*args, **kwargs)
    constructor.__name__ = old
    constructor.__doc__ = f"Deprecated: use ``lifedraw.{new}``."
    return staticmethod(constructor)


for _old, _new in _RENAMED.items():
    setattr(Target, _old, _deprecated_constructor(_old, _new))


class _HazardOnClassOrInstance:
    """``Target.hazard(expr)`` (deprecated constructor) versus ``target.hazard(t)`` (h(t))."""

    def __init__(self, instance_method):
        self.instance_method = instance_method

    def __get__(self, instance, owner):
        if instance is None:
            return _deprecated_constructor("hazard", "hazard_formula").__func__
        return self.instance_method.__get__(instance, owner)


Target.hazard = _HazardOnClassOrInstance(Target.hazard)
