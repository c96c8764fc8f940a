"""Series, parallel and k-out-of-n structures of parts, nestable: vectorised draws and
exact R(t), F(t) and f(t) from the parts' own laws.

NIST/SEMATECH e-Handbook of Statistical Methods 8.1.8.2 (series), 8.1.8.3 (parallel),
8.1.8.4 (r out of n); unequal k-out-of-n parts by the Poisson-binomial recursion
(Barlow & Heidtmann 1984, IEEE Trans. Reliability R-33(4), 322-323).
"""
from __future__ import annotations

import hashlib
import json
from typing import Any, Mapping, Sequence

import numpy as np

from .errors import ModelError, random_generator, sample_size
from .methods.base import CHUNK, Sampler
from .system_numerics import binomial_split, log_of, mean_by_integration, plain_spec, prod_others, working_counts
from .system_parts import Block, as_array, as_block, scalar_or_array
from .target import Target

STRUCTURES = ("series", "parallel", "k_out_of_n", "standby")
# Deepest nesting of structures (a real system has a handful of levels).
MAX_DEPTH = 64

RULES = {
    "series": "fails at the first part failure (NIST/SEMATECH e-Handbook 8.1.8.2)",
    "parallel": "works while any part works (NIST/SEMATECH e-Handbook 8.1.8.3)",
    "k_out_of_n": "works while at least {k} of its {n} parts work (NIST/SEMATECH e-Handbook 8.1.8.4)",
    "standby": ("cold standby: one part runs at a time, the next is switched in perfectly when it "
                "fails; lifetime = sum of the parts' lives (NIST/SEMATECH e-Handbook 8.1.8.5)"),
}


def masked_sf_cdf(support, t, inside_fn):
    """R and F with the support handled here, so rules only see ages inside it."""
    t = np.asarray(t, dtype=float)
    lo, hi = support
    sf = np.where(t < hi, 1.0, 0.0)
    sf = np.where(t <= lo, 1.0, sf)
    cdf = 1.0 - sf
    inside = (t > lo) & (t < hi)
    if np.any(inside):
        s, c = inside_fn(t[inside])
        sf[inside], cdf[inside] = np.clip(s, 0.0, 1.0), np.clip(c, 0.0, 1.0)
    nan = np.isnan(t)
    sf[nan] = cdf[nan] = np.nan
    return sf, cdf


class System(Block):
    """A structure of parts; build one with ``series``, ``parallel``, ``k_out_of_n`` or ``standby``."""

    kind = "abstract"

    def __init__(self, parts: Sequence, name: str = ""):
        if isinstance(parts, (Target, Sampler, Block, str, bytes, Mapping)):
            raise ModelError("parts", "must be a list of parts (targets, samplers or systems)")
        try:
            parts = list(parts)
        except TypeError:
            raise ModelError("parts", "must be a list of parts (targets, samplers or systems)") from None
        if len(parts) == 0:
            raise ModelError("parts", f"a {self.kind} system needs at least one part")
        self.parts: list[Block] = [as_block(p, f"parts[{i}]") for i, p in enumerate(parts)]
        self.name = str(name or "")
        # Evaluation recurses through the structure: bound its depth with a clear message.
        self.depth = 1 + max((getattr(p, "depth", 0) for p in self.parts), default=0)
        if self.depth > MAX_DEPTH:
            raise ModelError("parts", f"the structure nests {self.depth} levels deep; at most {MAX_DEPTH} "
                                      "levels are supported (flatten equal structures into one)")

    # ---- drawing ---------------------------------------------------------------------
    def sample(self, n, rng=None) -> np.ndarray:
        """Draw ``n`` system lifetimes; ``rng`` is a seed, a SeedSequence or a numpy Generator.

        Draws are made in blocks; within a block each part draws in the listed order.
        """
        n = sample_size("n", n)
        rng = random_generator(rng)
        out = np.empty(n)
        for start in range(0, n, CHUNK):
            stop = min(start + CHUNK, n)
            out[start:stop] = self._draw(stop - start, rng)
        return out

    def _part_draws(self, m, rng) -> np.ndarray:
        return np.stack([p._draw(m, rng) for p in self.parts])

    # ---- exact figures ------------------------------------------------------------------
    def reliability(self, t):
        """R(t) = P(system lifetime > t), computed from the parts' exact R, F and f."""
        t_arr = as_array(t)
        sf, _ = self._sf_cdf(t_arr.ravel())
        return scalar_or_array(sf, t_arr)

    def unreliability(self, t):
        """F(t) = 1 - R(t), computed on its own so small values keep their digits."""
        t_arr = as_array(t)
        _, cdf = self._sf_cdf(t_arr.ravel())
        return scalar_or_array(cdf, t_arr)

    def pdf(self, t):
        """Density of the system lifetime."""
        t_arr = as_array(t)
        return scalar_or_array(self._pdf(t_arr.ravel()), t_arr)

    def mean(self) -> float:
        """Mean time to failure: integral of R(t) (inf when it diverges)."""
        return mean_by_integration(self)

    def life_summary(self, n, rng=None, mission_times=(), confidence: float = 0.95) -> dict:
        """Draw ``n`` system lifetimes and summarise them with ``engine.life_summary``."""
        from .life import life_summary
        return life_summary(self.sample(n, rng), mission_times, confidence)

    def _masked(self, t, inside_fn):
        return masked_sf_cdf(self.support, t, inside_fn)

    # ---- words and data -------------------------------------------------------------------
    def rule(self) -> str:
        return RULES[self.kind]

    def describe(self) -> str:
        """Plain words: the structure, its rule, and each part (numbered, indented)."""
        label = f"{self.name}: " if self.name else ""
        lines = [f"{label}{self.kind.replace('_', '-')} system of {len(self.parts)} parts; {self.rule()}"]
        for i, part in enumerate(self.parts, 1):
            head, *rest = part.describe().splitlines()
            bullet = f"  {i}. "
            lines.append(bullet + head)
            lines.extend(" " * len(bullet) + line for line in rest)
        return "\n".join(lines)

    def spec(self) -> dict:
        """The structure as a plain dict, in the format of a scenario's [system] table."""
        out: dict[str, Any] = {"kind": self.kind}
        if self.name:
            out["name"] = self.name
        out.update(self._extra_spec())
        out["parts"] = [p.spec() for p in self.parts]
        return out

    def _extra_spec(self) -> dict:
        return {}

    def fingerprint(self) -> str:
        """sha256 of the structure and of each part's saved sampler (names do not count)."""
        doc = {"kind": self.kind, **self._extra_spec(), "parts": [p.fingerprint() for p in self.parts]}
        return hashlib.sha256(json.dumps(doc, sort_keys=True).encode()).hexdigest()

    def _scale_points(self):
        return np.unique(np.concatenate([p._scale_points() for p in self.parts]))

    def __repr__(self) -> str:
        return f"<{type(self).__name__} {self.kind} of {len(self.parts)} parts>"


class Series(System):
    """T = min(T_1, ..., T_n): R_S = prod R_i, h_S = sum h_i (e-Handbook 8.1.8.2)."""

    kind = "series"

    def __init__(self, parts, name=""):
        super().__init__(parts, name)
        los, his = zip(*(p.support for p in self.parts))
        self.support = (min(los), min(his))

    def _draw(self, m, rng):
        return np.min(self._part_draws(m, rng), axis=0)

    def _sf_cdf(self, t):
        def inside(t):
            sfs, cdfs = zip(*(p._sf_cdf(t) for p in self.parts))
            sf = np.prod(sfs, axis=0)
            # F_S = 1 - prod(1 - F_i), summed in logs so a small F_S keeps its digits.
            return sf, -np.expm1(np.sum([log_of(s, c) for s, c in zip(sfs, cdfs)], axis=0))
        return self._masked(t, inside)

    def _pdf(self, t):
        # f_S = sum_i f_i prod_{j != i} R_j
        sfs = np.array([p._sf_cdf(t)[0] for p in self.parts])
        pdfs = np.array([p._pdf(t) for p in self.parts])
        return np.sum(pdfs * prod_others(sfs), axis=0)


class Parallel(System):
    """T = max(T_1, ..., T_n): F_S = prod F_i (e-Handbook 8.1.8.3)."""

    kind = "parallel"

    def __init__(self, parts, name=""):
        super().__init__(parts, name)
        los, his = zip(*(p.support for p in self.parts))
        self.support = (max(los), max(his))

    def _draw(self, m, rng):
        return np.max(self._part_draws(m, rng), axis=0)

    def _sf_cdf(self, t):
        def inside(t):
            sfs, cdfs = zip(*(p._sf_cdf(t) for p in self.parts))
            cdf = np.prod(cdfs, axis=0)
            return -np.expm1(np.sum([log_of(c, s) for s, c in zip(sfs, cdfs)], axis=0)), cdf
        return self._masked(t, inside)

    def _pdf(self, t):
        # f_S = sum_i f_i prod_{j != i} F_j
        cdfs = np.array([p._sf_cdf(t)[1] for p in self.parts])
        pdfs = np.array([p._pdf(t) for p in self.parts])
        return np.sum(pdfs * prod_others(cdfs), axis=0)


class KOutOfN(System):
    """Works while at least k of its n parts work; fails at the (n-k+1)-th part failure.

    Identical parts: the binomial sum of e-Handbook 8.1.8.4. Unequal parts: the
    Poisson-binomial distribution of the number of working parts, by the recursion of
    Barlow & Heidtmann (1984).
    """

    kind = "k_out_of_n"

    def __init__(self, k, parts, name=""):
        super().__init__(parts, name)
        n = len(self.parts)
        if isinstance(k, bool) or not isinstance(k, (int, np.integer)) and not (
                isinstance(k, float) and k.is_integer()):
            raise ModelError("k", f"must be a whole number of parts, got {k!r}")
        k = int(k)
        if not 1 <= k <= n:
            raise ModelError("k", f"must lie between 1 and the number of parts ({n}), got {k}")
        self.k = k
        # The (n-k+1)-th smallest of the parts' lower and upper ends bound the system life.
        r = n - k
        self.support = (float(np.sort([p.support[0] for p in self.parts])[r]),
                        float(np.sort([p.support[1] for p in self.parts])[r]))
        specs = [json.dumps(plain_spec(p.spec()), sort_keys=True) for p in self.parts]
        self.identical = all(s == specs[0] for s in specs)

    def _extra_spec(self):
        return {"k": self.k}

    def rule(self):
        return RULES["k_out_of_n"].format(k=self.k, n=len(self.parts))

    def _draw(self, m, rng):
        n = len(self.parts)
        draws = self._part_draws(m, rng)
        return np.partition(draws, n - self.k, axis=0)[n - self.k]

    def _sf_cdf(self, t):
        def inside(t):
            n, k = len(self.parts), self.k
            sfs, cdfs = map(np.array, zip(*(p._sf_cdf(t) for p in self.parts)))
            if self.identical:
                return binomial_split(sfs[0], cdfs[0], n, k)
            counts = working_counts(sfs, cdfs)
            # Both sums are of non-negative terms, so each keeps its digits.
            return counts[k:].sum(axis=0), counts[:k].sum(axis=0)
        return self._masked(t, inside)

    def _pdf(self, t):
        # dR_S/dR_i = P(exactly k-1 of the other parts work), so f_S = sum_i f_i P_{-i}(k-1).
        sfs, cdfs = map(np.array, zip(*(p._sf_cdf(t) for p in self.parts)))
        pdfs = np.array([p._pdf(t) for p in self.parts])
        total = np.zeros_like(np.asarray(t, dtype=float))
        for i in range(len(self.parts)):            # loop over parts, not samples
            others = np.arange(len(self.parts)) != i
            total += pdfs[i] * working_counts(sfs[others], cdfs[others])[self.k - 1]
        return total
