"""System lifetimes from component lifetimes: series, parallel, k-out-of-n and cold standby
structures, nestable, drawn by vectorised sampling and evaluated exactly; the public face.

Formulas follow the NIST/SEMATECH e-Handbook of Statistical Methods, section 8.1.8. The work is
in one module per idea: system_parts (Block, Component), system_structures (series, parallel,
k-out-of-n), cold_standby (cold standby by a recursion in the number of parts), system_numerics
(quadrature and counts), system_specs (scenario [system] tables), system_target (a system as a
Target). Every public name stays importable from here.
"""
from __future__ import annotations

from .errors import ModelError
from .methods.base import Sampler
from .cold_standby import Convolution, Standby, TabulatedLaw
from .system_numerics import adaptive_integral, mean_by_integration
from .system_parts import Block, Component, as_block
from .system_specs import system_from_scenario, system_from_spec
from .system_structures import RULES, STRUCTURES, KOutOfN, Parallel, Series, System
from .system_target import SystemTarget, as_target
from .target import Target

__all__ = ["Block", "Component", "Convolution", "KOutOfN", "Parallel", "RULES", "STRUCTURES", "Series",
           "Standby", "System", "SystemTarget", "TabulatedLaw", "adaptive_integral", "as_block", "as_target",
           "component", "k_out_of_n", "mean_by_integration", "parallel", "series", "standby",
           "system_from_scenario", "system_from_spec"]


def series(parts, name: str = "") -> System:
    """Fails when the first part fails: lifetime = min of the parts' lives."""
    return Series(parts, name)


def parallel(parts, name: str = "") -> System:
    """Works while any part works: lifetime = max of the parts' lives."""
    return Parallel(parts, name)


def k_out_of_n(k: int, parts, name: str = "") -> System:
    """Works while at least ``k`` parts work: lifetime = the (n-k+1)-th smallest part life."""
    return KOutOfN(k, parts, name)


def standby(parts, name: str = "") -> System:
    """Cold standby, perfect switching: lifetime = sum of the parts' lives."""
    return Standby(parts, name)


def component(part, name: str = "", method: str = "auto", tolerance: float = 1e-10) -> Component:
    """A named part; a Target is fitted with ``method`` (``engine.fit``)."""
    if isinstance(part, Target):
        from .sampling import fit
        part = fit(part, method, tolerance)
    if not isinstance(part, Sampler):
        raise ModelError("part", f"must be an engine.Target or a sampler, got {type(part).__name__}")
    return Component(part, name)
