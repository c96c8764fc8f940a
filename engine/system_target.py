"""A system's lifetime seen as a Target, so checks and exact life figures take systems
as they take models (R, F and f from the structure; the quantile by root finding on F).

The structure's exact laws follow NIST/SEMATECH e-Handbook 8.1.8; see engine.systems.
"""
from __future__ import annotations

from .errors import ModelError
from .system_structures import System
from .target import Target


class SystemTarget(Target):
    """A system's lifetime seen as a Target (exact R, F and f from the structure), so
    ``engine.check`` and ``engine.exact_life_figures`` take systems as they take models.

    The quantile is found numerically from the exact F; draws come from the
    structure itself (``system.sample``), not from a method fitted to this view.
    """

    kind = "system"

    def __init__(self, system: System):
        if not isinstance(system, System):
            raise ModelError("system", "must be a system built with series, parallel, k_out_of_n or standby")
        self.system = system
        super().__init__(system.support, {})

    def _pdf(self, t):
        return self.system.pdf(t)

    def _cdf(self, t):
        return self.system.unreliability(t)

    def _sf(self, t):
        return self.system.reliability(t)

    def mean(self) -> float:
        return self.system.mean()

    def formula(self) -> str:
        return self.system.rule()

    def describe(self) -> str:
        return self.system.describe()

    def spec(self) -> dict:
        return {"kind": "system", "system": self.system.spec()}


def as_target(system: System) -> SystemTarget:
    """The Target view of a system (for checks and exact life figures)."""
    return SystemTarget(system)
