"""Model constructors: one function per kind of lifetime model, named after what the user supplies.

Every function returns a ``Target`` (the model object whose methods give f, F, S, h, H and
quantiles). They are exported at the top of the package: ``lifedraw.family(...)``,
``lifedraw.hazard_formula(...)``, ...
"""
from __future__ import annotations

import math
from typing import Iterable, Mapping, Sequence

from .target import Target

__all__ = ["family", "density_formula", "hazard_formula", "cdf_formula", "binned_counts", "failure_times",
           "mixture", "competing", "from_spec"]


def family(name: str, **params) -> Target:
    """A textbook lifetime family in the reliability parameterisation, e.g.
    ``family("weibull", shape=2.6, scale=31000)``."""
    from .families import FamilyTarget
    return FamilyTarget(name, **params)


def density_formula(expr: str, support=(0.0, math.inf), params: Mapping[str, float] | None = None) -> Target:
    """A density formula f(t) (unnormalised allowed: the area is computed and reported)."""
    from .formula_targets import DensityTarget
    return DensityTarget(expr, support, params or {})


def hazard_formula(expr: str, support=(0.0, math.inf), params: Mapping[str, float] | None = None) -> Target:
    """A hazard-rate formula h(t); the density is h(t)·exp(-H(t))."""
    from .formula_targets import HazardTarget
    return HazardTarget(expr, support, params or {})


def cdf_formula(expr: str, support=(0.0, math.inf), params: Mapping[str, float] | None = None) -> Target:
    """A cumulative distribution formula F(t), rising from 0 to 1 over the support."""
    from .formula_targets import CdfTarget
    return CdfTarget(expr, support, params or {})


def binned_counts(edges: Sequence[float], counts: Sequence[float], smooth: bool = False) -> Target:
    """Binned failure counts: uniform within each bin, or a smooth mass-keeping density."""
    from .field_data import HistogramTarget
    return HistogramTarget(edges, counts, smooth=smooth)


def failure_times(times: Sequence[float], censored: Sequence[bool] | None = None) -> Target:
    """Failure times with suspensions: product-limit inside the data, Weibull tail beyond."""
    from .field_data import ProductLimitTarget
    return ProductLimitTarget(times, censored)


def mixture(components: Iterable[Target], weights: Sequence[float]) -> Target:
    """A population mixing sub-populations (e.g. a bathtub curve)."""
    from .composite import MixtureTarget
    return MixtureTarget(list(components), weights)


def competing(components: Iterable[Target]) -> Target:
    """Independent failure modes; the first one to occur fails the unit."""
    from .composite import CompetingTarget
    return CompetingTarget(list(components))


def from_spec(spec: Mapping) -> Target:
    """Rebuild a model from ``target.spec()`` (also the scenario files' ``[model]`` table)."""
    from .specs import target_from_spec
    return target_from_spec(spec)
