"""The parts a system is built of: the Block interface every structure needs (draws, exact
R and F, f, scale points), and Component, one part drawn by its sampler and evaluated by its target.

Reliability block diagrams in the manner of the NIST/SEMATECH e-Handbook of Statistical
Methods, section 8.1.8 (a system as a structure of independent blocks).
"""
from __future__ import annotations

import copy

import numpy as np

from .errors import ModelError
from .methods.base import Sampler
from .target import Target


class Block:
    """What a system needs of each part: draws, R and F (each accurate on its own), f, mean."""

    name: str = ""
    support: tuple[float, float]

    def _draw(self, m: int, rng: np.random.Generator) -> np.ndarray:
        raise NotImplementedError

    def _sf_cdf(self, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        raise NotImplementedError

    def _pdf(self, t: np.ndarray) -> np.ndarray:
        raise NotImplementedError

    def _scale_points(self) -> np.ndarray:
        """Characteristic ages (quantiles of the leaves) that split integrals into easy pieces."""
        raise NotImplementedError

    def working_copy(self) -> "Block":
        """A copy for one task: every component draws through its sampler's working copy
        (Sampler.working_copy: shared tables, own counters and working state); everything else
        is deep-copied. A plain deep copy would rebuild every component from its saved file."""
        memo: dict = {}
        pending = [self]
        while pending:
            block = pending.pop()
            if isinstance(block, Component):
                if id(block) not in memo:
                    memo[id(block)] = block.working_copy()
            else:
                pending.extend(getattr(block, "parts", ()))
        return copy.deepcopy(self, memo)


class Component(Block):
    """One part: a sampler (draws) and its target (exact R, F, f and quantile)."""

    def __init__(self, sampler: Sampler, name: str = ""):
        self.sampler = sampler
        self.target = sampler.target
        self.name = str(name or "")
        self.support = self.target.support

    def _draw(self, m, rng):
        return self.sampler.sample(m, rng)

    def working_copy(self) -> "Component":
        return Component(self.sampler.working_copy(), self.name)

    def _sf_cdf(self, t):
        return np.asarray(self.target.sf(t), dtype=float), np.asarray(self.target.cdf(t), dtype=float)

    def _pdf(self, t):
        return np.asarray(self.target.pdf(t), dtype=float)

    def quantile(self, v):
        """F^-1: the target's closed form, else the sampler's own inverse (within its u-error),
        which is far faster than root finding inside the standby integrals."""
        if not self.target.exact_quantile and callable(getattr(self.sampler, "quantile", None)):
            return np.asarray(self.sampler.quantile(v), dtype=float)
        return np.asarray(self.target.quantile(v), dtype=float)

    def isf(self, u):
        """Q(1 - u), from the upper tail: the target's closed form keeps tail digits."""
        if not self.target.exact_quantile and callable(getattr(self.sampler, "quantile", None)):
            return np.asarray(self.sampler.quantile(1.0 - np.asarray(u)), dtype=float)
        return np.asarray(self.target.isf(u), dtype=float)

    def mean(self) -> float:
        return float(self.target.mean())

    def _scale_points(self):
        q = np.asarray(self.target.quantile(np.array([1e-6, 0.01, 0.5, 0.99, 1 - 1e-9])), dtype=float)
        return q[np.isfinite(q)]

    def spec(self) -> dict:
        """The model table plus the method (and a non-default tolerance) that drew it."""
        out = {**({"name": self.name} if self.name else {}), **self.target.spec(), "method": self.sampler.method}
        if self.sampler.tolerance != 1e-10:
            out["tolerance"] = self.sampler.tolerance
        return out

    def describe(self) -> str:
        label = f"{self.name}: " if self.name else ""
        words = self.target.describe().splitlines()
        return f"{label}{words[0] if words else repr(self.target)} [{self.sampler.method}]"

    def fingerprint(self) -> str:
        from .generate import sampler_fingerprint
        return sampler_fingerprint(self.sampler)

    def __reduce__(self):
        # Formula targets hold compiled functions that pickle cannot carry; the
        # sampler travels as its saved file instead (engine.storage).
        from .generate import sampler_to_bytes
        return (component_from_bytes, (sampler_to_bytes(self.sampler), self.name))


def component_from_bytes(blob: bytes, name: str) -> Component:
    from .generate import sampler_from_bytes
    return Component(sampler_from_bytes(blob), name)


def as_block(part, field: str) -> Block:
    if isinstance(part, Block):
        return part
    if isinstance(part, Sampler):
        return Component(part)
    if isinstance(part, Target):
        from .sampling import fit
        return Component(fit(part, "auto"))
    raise ModelError(field, f"must be an engine.Target, a sampler or a system, got {type(part).__name__}")


def as_array(t) -> np.ndarray:
    try:
        arr = np.asarray(t, dtype=float)
    except (TypeError, ValueError):
        raise ModelError("t", "must be numbers") from None
    return arr


def scalar_or_array(x: np.ndarray, like: np.ndarray):
    return float(x.reshape(-1)[0]) if np.ndim(like) == 0 else x.reshape(np.shape(like))
