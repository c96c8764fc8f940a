"""Composition for mixtures: pick a sub-population with the alias method, then draw
from it with that component's own best sampler.

The composition method: Devroye (1986), Non-Uniform Random Variate Generation,
section II.4; component choice by Walker's alias method (Walker 1977).
"""
from __future__ import annotations

from typing import Any

import numpy as np

from ..composite import MixtureTarget
from .. import table_checks
from ..errors import MethodNotApplicable, ModelError
from ..target import Target
from .base import COUNTER_NAMES, Sampler
from .table import alias_table


class Composition(Sampler):
    """X = X_J with P(J = j) = w_j and X_j drawn by component j's sampler."""

    method = "composition"
    reference = "Composition method (Devroye 1986, II.4); alias choice of the component (Walker 1977)"

    @classmethod
    def check_applicable(cls, target: Target) -> None:
        if not isinstance(target, MixtureTarget):
            raise MethodNotApplicable("method", "composition serves mixtures of sub-populations; "
                                                "this model is not a mixture")

    def _own_working_state(self) -> None:
        self.parts = [part.working_copy() for part in self.parts]

    def _setup(self) -> None:
        from ..sampling import fit
        t = self.target
        self.parts = [fit(c, "auto", self.tolerance) for c in t.components]
        self.keep, self.alias = alias_table(t.weights)
        errors = [p.stats.get("u_error") for p in self.parts]
        self.extra_stats.update({
            "components": [f"{p.method} ({p.stats.get('variant', '')})".replace(" ()", "") for p in self.parts],
            "u_error": max((e for e in errors if e is not None), default=None),
        })

    def _draw(self, m, rng):
        k = len(self.parts)
        u = rng.random(m)
        col = np.minimum((u * k).astype(np.int64), k - 1)
        v = rng.random(m)
        self.counts["uniforms"] += 2 * m
        which = np.where(v < self.keep[col], col, self.alias[col])
        out = np.empty(m)
        for j, part in enumerate(self.parts):          # loop over components, not samples
            idx = np.flatnonzero(which == j)
            if idx.size:
                before = dict(part.counts)
                out[idx] = part._draw(idx.size, rng)
                part.counts["samples"] += idx.size
                for name in COUNTER_NAMES:
                    if name != "samples":
                        self.counts[name] += part.counts[name] - before[name]
        return out

    def reset_counters(self) -> None:
        super().reset_counters()
        for part in getattr(self, "parts", []):
            part.reset_counters()

    @property
    def table_bytes(self) -> int:
        own = self.keep.nbytes + self.alias.nbytes if hasattr(self, "keep") else 0
        return int(own + sum(p.table_bytes for p in getattr(self, "parts", [])))

    def geometry(self, n_points: int = 400, rng=0) -> dict[str, Any]:
        return {"method": self.method, "weights": self.target.weights,
                "parts": [p.geometry(n_points, rng) for p in self.parts],
                "part_methods": [p.method for p in self.parts]}

    # Each component's tables are stored under "part<j>." so loading restores
    # them without redoing any set-up.
    def _tables(self):
        out = {"keep": self.keep, "alias": self.alias}
        for j, part in enumerate(self.parts):
            out.update({f"part{j}.{k}": v for k, v in part._tables().items()})
        return out

    def _meta(self):
        return {"parts": [{"class": type(p).__name__, "meta": p._meta(), "reason": p.reason,
                           "setup_seconds": p.setup_seconds} for p in self.parts],
                "components": self.extra_stats["components"], "u_error": self.extra_stats["u_error"]}

    def _restore(self, meta, tables):
        from ..storage import restore_sampler
        k = len(self.target.components)
        self.keep = table_checks.table(tables, "keep", length=k, low=0.0, high=1.0)
        # An alias outside the components would leave draws unwritten: refused here.
        self.alias = table_checks.table(tables, "alias", kind="int", length=k, low=0, high=k - 1)
        parts = meta.get("parts") if isinstance(meta, dict) else None
        if not isinstance(parts, list) or len(parts) != k or not all(isinstance(p, dict) for p in parts):
            raise ModelError("path", f"the sampler file's 'parts' metadata does not describe {k} components; "
                                     "the file is damaged")
        self.parts = []
        for j, (info, component) in enumerate(zip(parts, self.target.components)):
            prefix = f"part{j}."
            own = {k_[len(prefix):]: v for k_, v in tables.items() if k_.startswith(prefix)}
            self.parts.append(restore_sampler(
                str(info.get("class")), component, self.tolerance, table_checks.mapping(info, "meta"), own,
                setup_seconds=table_checks.number(info, "setup_seconds", low=0.0),
                reason=str(info.get("reason", ""))))
        self.extra_stats.update({"components": meta.get("components"),
                                 "u_error": table_checks.number(meta, "u_error", low=0.0, optional=True)})
