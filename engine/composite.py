"""Targets built from other targets: mixtures (bathtub curves), competing failure
modes, and the residual life of a unit that has survived to a given age.

Formulas follow the NIST/SEMATECH e-Handbook, sections 8.1.6.6 (competing risk
model: R = product of the modes' reliabilities), 8.1.6.7 (mixture model) and
8.1.2.4 (conditional reliability R(t + x)/R(t)).
"""
from __future__ import annotations

import math
from typing import Sequence

import numpy as np

from .errors import ModelError, finite_number
from .target import Target
from .numeric import invert_monotone

_GL20_NODES, _GL20_WEIGHTS = np.polynomial.legendre.leggauss(20)


def _check_components(components, field="components"):
    if len(components) == 0:
        raise ModelError(field, "at least one component is needed")
    for i, c in enumerate(components):
        if not isinstance(c, Target):
            raise ModelError(f"{field}[{i}]", f"must be a Target, got {type(c).__name__}")


class MixtureTarget(Target):
    """A population made of sub-populations: f = sum of w_i f_i with sum w_i = 1."""

    kind = "mixture"

    def __init__(self, components: list[Target], weights: Sequence[float]):
        _check_components(components)
        try:
            w = np.asarray(weights, dtype=float).ravel()
        except (TypeError, ValueError):
            raise ModelError("weights", "must be numbers") from None
        if w.size != len(components):
            raise ModelError("weights", f"{w.size} weights for {len(components)} components; "
                                        "give one weight per component")
        for i, wi in enumerate(w):
            if not np.isfinite(wi) or wi < 0:
                raise ModelError("weights", f"weight {i + 1} must be a finite number >= 0, got {wi:g}")
        if w.sum() <= 0:
            raise ModelError("weights", "the weights add up to 0")
        self.components = components
        self.weights = w / w.sum()
        lo = min(c.support[0] for c in components)
        hi = max(c.support[1] for c in components)
        super().__init__((lo, hi), {f"weight{i + 1}": float(x) for i, x in enumerate(self.weights)})
        self.pole_at_lower = any(c.pole_at_lower and c.support[0] == lo for c in components)
        self.atoms = np.unique(np.concatenate([c.atoms for c in components]))

    def _sum(self, fn, t):
        return sum(w * getattr(c, fn)(t) for w, c in zip(self.weights, self.components))

    def _pdf(self, t):
        return self._sum("pdf", t)

    def _cdf(self, t):
        return self._sum("cdf", t)

    def _sf(self, t):
        return self._sum("sf", t)

    def moment(self, k: int) -> float:
        return float(sum(w * c.moment(k) for w, c in zip(self.weights, self.components)))

    def atom_masses(self):
        masses = {}
        for w, c in zip(self.weights, self.components):
            for t, p in c.atom_masses():
                masses[t] = masses.get(t, 0.0) + w * p
        return sorted(masses.items())

    def breakpoints(self) -> list[float]:
        """Ages where the density may have a kink or jump (component support ends)."""
        pts = []
        for c in self.components:
            pts.extend(x for x in c.support if np.isfinite(x))
            pts.extend(getattr(c, "breakpoints", lambda: [])())
        lo, hi = self.support
        return sorted({p for p in pts if lo < p < hi})

    def formula(self) -> str:
        return " + ".join(f"{w:.4g}·f{i + 1}(t)" for i, w in enumerate(self.weights))

    def describe(self) -> str:
        lines = [f"Mixture of {len(self.components)} sub-populations: f(t) = {self.formula()}."]
        for i, (w, c) in enumerate(zip(self.weights, self.components)):
            first = c.describe().splitlines()[0]
            lines.append(f"  f{i + 1} ({w:.1%} of units): {first}")
        return "\n".join(lines)

    def spec(self) -> dict:
        return {"kind": "mixture", "components": [c.spec() for c in self.components],
                "weights": [float(x) for x in self.weights]}


class CompetingTarget(Target):
    """Independent failure modes in series: the unit fails at the first mode's time.

    R(t) = product of R_i(t); h(t) = sum of h_i(t) (NIST e-Handbook 8.1.6.6).
    """

    kind = "competing"

    def __init__(self, components: list[Target]):
        _check_components(components)
        self.components = components
        lo = min(c.support[0] for c in components)
        hi = min(c.support[1] for c in components)
        super().__init__((lo, hi), {})
        self.pole_at_lower = any(c.pole_at_lower and c.support[0] == lo for c in components)
        if any(c.atoms.size for c in components):
            raise ModelError("components", "competing modes must be continuous models "
                                           "(a product-limit estimate has atoms)")

    def _log_sf(self, t):
        # log R_i from F_i where F_i is small (log1p keeps the digits of a
        # reliability close to 1), from R_i otherwise.
        total = 0.0
        with np.errstate(divide="ignore"):
            for c in self.components:
                F = c.cdf(t)
                total = total + np.where(F < 0.5, np.log1p(-np.minimum(F, 0.5)), np.log(c.sf(t)))
        return total

    def _sf(self, t):
        return np.exp(self._log_sf(t))

    def _cdf(self, t):
        return -np.expm1(self._log_sf(t))

    def _hazard(self, t):
        return sum(c.hazard(t) for c in self.components)

    def _pdf(self, t):
        # f = sum_i f_i * prod_{j != i} R_j, which stays finite where some R_j = 0.
        sfs = [c.sf(t) for c in self.components]
        total = 0.0
        for i, c in enumerate(self.components):
            term = c.pdf(t)
            for j, s in enumerate(sfs):
                if j != i:
                    term = term * s
            total = total + term
        return total

    def breakpoints(self) -> list[float]:
        pts = []
        for c in self.components:
            pts.extend(x for x in c.support if np.isfinite(x))
        lo, hi = self.support
        return sorted({p for p in pts if lo < p < hi})

    def formula(self) -> str:
        return "R(t) = " + " · ".join(f"R{i + 1}(t)" for i in range(len(self.components)))

    def describe(self) -> str:
        lines = [f"{len(self.components)} independent failure modes; the first to occur fails "
                 f"the unit: {self.formula()}, h(t) = sum of the modes' hazards."]
        for i, c in enumerate(self.components):
            lines.append(f"  mode {i + 1}: {c.describe().splitlines()[0]}")
        lines.append("Assumes the modes are independent; dependent modes need a joint model.")
        return "\n".join(lines)

    def spec(self) -> dict:
        return {"kind": "competing", "components": [c.spec() for c in self.components]}


class ResidualTarget(Target):
    """Remaining life X = T - a of a unit known to have survived to age a.

    R_X(x) = R(a + x)/R(a) (conditional reliability, NIST e-Handbook 8.1.2.4).
    """

    kind = "residual"

    def __init__(self, base: Target, age: float):
        if not isinstance(base, Target):
            raise ModelError("base", "must be a Target")
        age = finite_number("age", age, nonnegative=True)
        lo, hi = base.support
        if age >= hi:
            raise ModelError("age", f"{age:g} is beyond the end of the support ({hi:g}): "
                                    "no unit survives that long")
        r = float(base.sf(age))
        if not r > 0:
            raise ModelError("age", f"the model gives no chance of surviving to {age:g} "
                                    "(reliability underflows to 0)")
        self.base = base
        self.age = age
        self.r_age = r
        self.f_age = float(base.cdf(age))
        super().__init__((max(lo - age, 0.0), hi - age), {**base.params, "age": age})
        self.pole_at_lower = base.pole_at_lower and lo >= age
        self.exact_quantile = base.exact_quantile
        if base.atoms.size:
            self.atoms = base.atoms[base.atoms > age] - age

    def _pdf(self, t):
        return self.base.pdf(self.age + t) / self.r_age

    def _logpdf(self, t):
        return self.base.logpdf(self.age + t) - math.log(self.r_age)

    def _sf(self, t):
        return self.base.sf(self.age + t) / self.r_age

    def _cdf(self, t):
        t = np.asarray(t, dtype=float)
        if self.f_age < 0.5:
            out = (self.base.cdf(self.age + t) - self.f_age) / self.r_age
        else:
            out = (self.r_age - self.base.sf(self.age + t)) / self.r_age
        # Small remaining lives: F(a + x) - F(a) cancels, so integrate the
        # density over [a, a + x] directly (20-point Gauss-Legendre on a short,
        # smooth stretch) where the difference is under 1e-3.
        small = (out < self._direct_below) & (t > 0)
        if np.any(small) and not self.base.atoms.size:
            out = np.array(out, dtype=float)
            out[small] = self._short_mass(t[small])
        return out

    @property
    def _direct_below(self) -> float:
        # The difference F(a + x) - F(a) loses about |ln R(a)|·eps/F_X relative:
        # integrate directly wherever that would exceed ~1e-13.
        return min(0.5, 1e-3 * max(1.0, abs(math.log(self.r_age))))

    def _short_mass(self, x):
        """Mass of [a, a + x] by 20-point Gauss-Legendre on four equal parts."""
        parts = 4
        width = x / parts
        offsets = np.arange(parts)[None, :, None] * width[:, None, None]
        nodes = self.age + offsets + 0.5 * width[:, None, None] * (1.0 + _GL20_NODES[None, None, :])
        values = self.base.pdf(nodes.reshape(x.size, -1)).reshape(nodes.shape)
        return 0.5 * width * np.sum(values @ _GL20_WEIGHTS, axis=1) / self.r_age

    def _hazard(self, t):
        return self.base.hazard(self.age + t)

    def _quantile(self, u):
        if self.base.exact_quantile and self.base.atoms.size == 0:
            # R(a + x) = (1 - u) R(a): invert from the upper tail, where the digits are.
            x = np.maximum(self.base.isf((1.0 - u) * self.r_age) - self.age, self.support[0])
            # x = Q - a cancels for small u: two Newton steps on the accurate cdf restore the digits.
            small = u < self._direct_below
            if np.any(small):
                xs = x[small]
                for _ in range(2):
                    f = self.pdf(xs)
                    with np.errstate(all="ignore"):
                        step = (self.cdf(xs) - u[small]) / f
                    xs = np.where(np.isfinite(step) & (f > 0), np.maximum(xs - step, self.support[0]), xs)
                x = np.array(x, dtype=float)
                x[small] = xs
            return x
        return invert_monotone(self.cdf, self.sf, u, self.mapping, pdf=self.pdf)

    def _isf(self, v):
        v = np.asarray(v, dtype=float)
        if self.base.exact_quantile and self.base.atoms.size == 0:
            # R(a + x) = v R(a): the base model's own upper tail keeps the digits.
            return np.maximum(self.base.isf(v * self.r_age) - self.age, self.support[0])
        return super()._isf(v)

    def breakpoints(self) -> list[float]:
        lo, hi = self.support
        shifted = [b - self.age for b in getattr(self.base, "breakpoints", lambda: [])()]
        return [b for b in shifted if lo < b < hi]

    def atom_masses(self):
        return [(t - self.age, p / self.r_age) for t, p in self.base.atom_masses() if t > self.age]

    def formula(self) -> str:
        return f"R(x) = R({self.age:g} + x) / R({self.age:g})"

    def describe(self) -> str:
        return (f"Residual life of units that have survived to age {self.age:g} "
                f"(R({self.age:g}) = {self.r_age:.4g}); x is the remaining life.\n"
                f"{self.formula()}\nBase model: {self.base.describe()}")

    def spec(self) -> dict:
        return {"kind": "residual", "age": self.age, "base": self.base.spec()}
