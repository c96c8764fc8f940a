"""System lifetimes from component lifetimes: series, parallel, k-out-of-n and cold
standby structures, nestable, drawn by vectorised sampling and evaluated exactly.

Formulas follow the NIST/SEMATECH e-Handbook of Statistical Methods, section 8.1.8
(8.1.8.2 series, 8.1.8.3 parallel, 8.1.8.4 r out of n, 8.1.8.5 standby); unequal
k-out-of-n units use the Poisson-binomial recursion (Barlow & Heidtmann 1984,
IEEE Trans. Reliability R-33(4), 322-323).
"""
from __future__ import annotations

import hashlib
import json
import math
from typing import Any, Mapping, Sequence

import numpy as np
from scipy import special

from .errors import ModelError, sample_size
from .methods.base import CHUNK, Sampler
from .target import Target

STRUCTURES = ("series", "parallel", "k_out_of_n", "standby")

# Accuracy asked of the standby convolution integrals, relative to each value.
_EPSREL = 1e-10
# Keys a part table of a scenario's [system] may carry besides its model or structure.
_PART_KEYS = {"name", "copies", "method", "tolerance"}

_RULES = {
    "series": "fails at the first part failure (NIST/SEMATECH e-Handbook 8.1.8.2)",
    "parallel": "works while any part works (NIST/SEMATECH e-Handbook 8.1.8.3)",
    "k_out_of_n": "works while at least {k} of its {n} parts work (NIST/SEMATECH e-Handbook 8.1.8.4)",
    "standby": ("cold standby: one part runs at a time, the next is switched in perfectly when it "
                "fails; lifetime = sum of the parts' lives (NIST/SEMATECH e-Handbook 8.1.8.5)"),
}


# ---- building blocks ---------------------------------------------------------------------

class _Block:
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


class Component(_Block):
    """One part: a sampler (draws) and its target (exact R, F, f and quantile)."""

    def __init__(self, sampler: Sampler, name: str = ""):
        self.sampler = sampler
        self.target = sampler.target
        self.name = str(name or "")
        self.support = self.target.support

    def _draw(self, m, rng):
        return self.sampler.sample(m, rng)

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
        return (_component_from_bytes, (sampler_to_bytes(self.sampler), self.name))


def _component_from_bytes(blob: bytes, name: str) -> Component:
    from .generate import sampler_from_bytes
    return Component(sampler_from_bytes(blob), name)


def _as_block(part, field: str) -> _Block:
    if isinstance(part, _Block):
        return part
    if isinstance(part, Sampler):
        return Component(part)
    if isinstance(part, Target):
        from .sampling import fit
        return Component(fit(part, "auto"))
    raise ModelError(field, f"must be an engine.Target, a sampler or a system, got {type(part).__name__}")


def _as_array(t) -> np.ndarray:
    try:
        arr = np.asarray(t, dtype=float)
    except (TypeError, ValueError):
        raise ModelError("t", "must be numbers") from None
    return arr


def _scalar_or_array(x: np.ndarray, like: np.ndarray):
    return float(x.reshape(-1)[0]) if np.ndim(like) == 0 else x.reshape(np.shape(like))


# ---- systems -------------------------------------------------------------------------------

class System(_Block):
    """A structure of parts; build one with ``series``, ``parallel``, ``k_out_of_n`` or ``standby``."""

    kind = "abstract"

    def __init__(self, parts: Sequence, name: str = ""):
        if isinstance(parts, (Target, Sampler, _Block, str, bytes, Mapping)):
            raise ModelError("parts", "must be a list of parts (targets, samplers or systems)")
        try:
            parts = list(parts)
        except TypeError:
            raise ModelError("parts", "must be a list of parts (targets, samplers or systems)") from None
        if len(parts) == 0:
            raise ModelError("parts", f"a {self.kind} system needs at least one part")
        self.parts: list[_Block] = [_as_block(p, f"parts[{i}]") for i, p in enumerate(parts)]
        self.name = str(name or "")

    # ---- drawing ---------------------------------------------------------------------
    def sample(self, n, rng=None) -> np.ndarray:
        """Draw ``n`` system lifetimes; ``rng`` is a seed, a SeedSequence or a numpy Generator.

        Draws are made in blocks; within a block each part draws in the listed order.
        """
        n = sample_size("n", n)
        rng = np.random.default_rng(rng)
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
        t_arr = _as_array(t)
        sf, _ = self._sf_cdf(t_arr.ravel())
        return _scalar_or_array(sf, t_arr)

    def unreliability(self, t):
        """F(t) = 1 - R(t), computed on its own so small values keep their digits."""
        t_arr = _as_array(t)
        _, cdf = self._sf_cdf(t_arr.ravel())
        return _scalar_or_array(cdf, t_arr)

    def pdf(self, t):
        """Density of the system lifetime."""
        t_arr = _as_array(t)
        return _scalar_or_array(self._pdf(t_arr.ravel()), t_arr)

    def mean(self) -> float:
        """Mean time to failure: integral of R(t) (inf when it diverges)."""
        return _mean_by_integration(self)

    def life_summary(self, n, rng=None, mission_times=(), confidence: float = 0.95) -> dict:
        """Draw ``n`` system lifetimes and summarise them with ``engine.life_summary``."""
        from .life import life_summary
        return life_summary(self.sample(n, rng), mission_times, confidence)

    def _masked(self, t, inside_fn):
        """R and F with the support handled here, so rules only see ages inside it."""
        t = np.asarray(t, dtype=float)
        lo, hi = self.support
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

    # ---- words and data -------------------------------------------------------------------
    def rule(self) -> str:
        return _RULES[self.kind]

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
            return sf, -np.expm1(np.sum([_log_of(s, c) for s, c in zip(sfs, cdfs)], axis=0))
        return self._masked(t, inside)

    def _pdf(self, t):
        # f_S = sum_i f_i prod_{j != i} R_j
        sfs = np.array([p._sf_cdf(t)[0] for p in self.parts])
        pdfs = np.array([p._pdf(t) for p in self.parts])
        return np.sum(pdfs * _prod_others(sfs), axis=0)


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
            return -np.expm1(np.sum([_log_of(c, s) for s, c in zip(sfs, cdfs)], axis=0)), cdf
        return self._masked(t, inside)

    def _pdf(self, t):
        # f_S = sum_i f_i prod_{j != i} F_j
        cdfs = np.array([p._sf_cdf(t)[1] for p in self.parts])
        pdfs = np.array([p._pdf(t) for p in self.parts])
        return np.sum(pdfs * _prod_others(cdfs), axis=0)


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
        specs = [json.dumps(_plain(p.spec()), sort_keys=True) for p in self.parts]
        self.identical = all(s == specs[0] for s in specs)

    def _extra_spec(self):
        return {"k": self.k}

    def rule(self):
        return _RULES["k_out_of_n"].format(k=self.k, n=len(self.parts))

    def _draw(self, m, rng):
        n = len(self.parts)
        draws = self._part_draws(m, rng)
        return np.partition(draws, n - self.k, axis=0)[n - self.k]

    def _sf_cdf(self, t):
        def inside(t):
            n, k = len(self.parts), self.k
            sfs, cdfs = map(np.array, zip(*(p._sf_cdf(t) for p in self.parts)))
            if self.identical:
                return _binomial_split(sfs[0], cdfs[0], n, k)
            counts = _working_counts(sfs, cdfs)
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
            total += pdfs[i] * _working_counts(sfs[others], cdfs[others])[self.k - 1]
        return total


class Standby(System):
    """Cold standby with perfect switching: T = T_1 + ... + T_n (e-Handbook 8.1.8.5).

    R(t) = R_1(t) + integral_0^t f_1(s) R_rest(t - s) ds, the handbook's convolution,
    is written in the first part's probability scale, s = Q_1(v):
    R(t) = R_1(t) + integral_0^{F_1(t)} R_rest(t - Q_1(v)) dv, and F(t) likewise with F_rest
    (v up to 1/2; beyond, u = 1 - v on a log scale, so far-tail values keep their digits).
    That form needs no density, so density poles, atoms and failure-free periods cost
    nothing. Integrals are adaptive and vectorised (``_adaptive_integral``), to a relative
    1e-10 of each value; a rest of several parts nests them. A component (which has an
    inverse CDF) is put first; if every part is itself a system, the density form with the
    first part's f is used.
    """

    kind = "standby"

    def __init__(self, parts, name=""):
        super().__init__(parts, name)
        self.support = (sum(p.support[0] for p in self.parts), sum(p.support[1] for p in self.parts))
        order = sorted(range(len(self.parts)), key=lambda i: not isinstance(self.parts[i], Component))
        self._first = self.parts[order[0]]
        rest = [self.parts[i] for i in order[1:]]
        self._rest = None if not rest else rest[0] if len(rest) == 1 else Standby(rest)

    def _draw(self, m, rng):
        return np.sum(self._part_draws(m, rng), axis=0)

    def mean(self) -> float:
        # E[T_1 + ... + T_n] = sum of the parts' means.
        return float(sum(p.mean() for p in self.parts))

    def _sf_cdf(self, t):
        if self._rest is None:
            return self._first._sf_cdf(t)

        def inside(t):
            first, rest = self._first, self._rest
            sf1, cdf1 = first._sf_cdf(t)
            integrals = self._convolve(t, cdf1, lambda ages: np.stack(rest._sf_cdf(ages)), 2)
            return sf1 + integrals[0], integrals[1]
        return self._masked(t, inside)

    def _pdf(self, t):
        if self._rest is None:
            return self._first._pdf(t)
        t = np.asarray(t, dtype=float)
        out = np.zeros_like(t)
        lo, hi = self.support
        inside = (t > lo) & (t < hi)
        if np.any(inside):
            ti = t[inside]
            cdf1 = self._first._sf_cdf(ti)[1]
            out[inside] = self._convolve(ti, cdf1, self._rest._pdf, 1)[0]
        return out

    def _convolve(self, t, cdf1, g, rows):
        """For each t, the integral over the first part's life s <= t of g(t - s) (``rows`` rows)."""
        first = self._first
        if not isinstance(first, Component):
            lo1 = first.support[0]
            span = np.maximum(t - lo1, 0.0)

            def in_time(idx, w):
                s = lo1 + span[idx] * w
                return span[idx] * first._pdf(s) * g(t[idx] - s).reshape(rows, -1)
            return _adaptive_integral(in_time, t.size, rows)

        # Lower half of the first part's probability scale: s = Q_1(v), v in [0, min(F_1(t), 1/2)].
        top = np.minimum(cdf1, 0.5)

        def lower(idx, w):
            v = top[idx] * w
            return top[idx] * g(t[idx] - first.quantile(v)).reshape(rows, -1)
        total = _adaptive_integral(lower, t.size, rows)
        # Upper half, where F_1(t) > 1/2: s = Q_1(1 - u) with u from 1/2 down to R_1(t) on a log
        # scale, because there the mass sits within R_1(t) of 1 (far below double resolution in v).
        upper = np.flatnonzero(cdf1 > 0.5)
        if upper.size:
            tu = t[upper]
            log_half = math.log(0.5)
            log_end = np.log(np.maximum(self._first._sf_cdf(tu)[0], 1e-300))

            def in_survival(idx, w):
                u = np.exp(log_half + w * (log_end[idx] - log_half))
                return (log_half - log_end[idx]) * u * g(tu[idx] - first.isf(u)).reshape(rows, -1)
            total[:, upper] += _adaptive_integral(in_survival, upper.size, rows)
        return total

    def _scale_points(self):
        # A sum lives on the scale of the summed parts: add their middle and far points.
        own = [p._scale_points() for p in self.parts]
        sums = [sum(float(np.median(q)) for q in own if q.size), sum(float(q.max()) for q in own if q.size)]
        return np.unique(np.concatenate([np.array(sums), *own]))


# ---- the public constructors -------------------------------------------------------------

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


# ---- scenario files ---------------------------------------------------------------------------

def system_from_spec(spec: Mapping, path: str = "system", method: str = "auto",
                     tolerance: float = 1e-10) -> System:
    """Build a system from a [system] table whose parameter names are already resolved.

    A table with ``kind`` in series/parallel/k_out_of_n/standby is a structure with
    ``parts`` (and ``k``); any other table is a model, as in [model]. Any part may
    carry ``name``, ``copies`` (that many identical, independent parts), and a model
    part ``method`` and ``tolerance``.
    """
    block = _block_from_spec(spec, path, method, tolerance)
    if not isinstance(block, System):
        raise ModelError(f"{path}.kind", f"the top of a system must be one of {', '.join(STRUCTURES)}")
    return block


def system_from_scenario(scenario, **overrides) -> System:
    """The scenario's [system] table as a System (parameter names resolved like [model])."""
    from .scenarios import resolve_parameters
    if not scenario.system:
        raise ModelError("system", f"scenario {scenario.name!r} has no [system] table")
    resolved = resolve_parameters(scenario.system, scenario.values(**overrides), "system")
    return system_from_spec(resolved, "system", tolerance=scenario.tolerance)


def _block_from_spec(spec, path, method, tolerance) -> _Block:
    if not isinstance(spec, Mapping):
        raise ModelError(path, "must be a table")
    kind = str(spec.get("kind", "")).lower()
    name = str(spec.get("name", ""))
    if kind in STRUCTURES:
        parts_spec = spec.get("parts")
        if not isinstance(parts_spec, (list, tuple)) or not parts_spec:
            raise ModelError(f"{path}.parts", "must be a non-empty list of part tables")
        parts = []
        for i, part in enumerate(parts_spec):
            copies = _copies(part, f"{path}.parts[{i}]")
            block = _block_from_spec(part, f"{path}.parts[{i}]", method, tolerance)
            parts.extend([block] * copies)
        try:
            if kind == "k_out_of_n":
                if "k" not in spec:
                    raise ModelError("k", "missing (how many parts must work)")
                return KOutOfN(spec["k"], parts, name)
            return {"series": Series, "parallel": Parallel, "standby": Standby}[kind](parts, name)
        except ModelError as err:
            raise ModelError(f"{path}.{err.field}", err.reason) from None
    from .sampling import fit
    from .specs import target_from_spec
    model = {k: v for k, v in spec.items() if k not in _PART_KEYS}
    target = target_from_spec(model, path)
    try:
        sampler = fit(target, str(spec.get("method", method)), float(spec.get("tolerance", tolerance)))
    except ModelError as err:
        raise ModelError(f"{path}.{err.field}", err.reason) from None
    return Component(sampler, name)


def _copies(part, path) -> int:
    raw = part.get("copies", 1) if isinstance(part, Mapping) else 1
    if isinstance(raw, bool) or not isinstance(raw, int) or raw < 1:
        raise ModelError(f"{path}.copies", f"must be a whole number >= 1, got {raw!r}")
    return raw


# ---- numerics -------------------------------------------------------------------------------

def _log_of(x, complement):
    """log(x) computed from whichever of x and 1 - x is known more precisely."""
    with np.errstate(divide="ignore"):
        return np.where(x < 0.5, np.log(x), np.log1p(-complement))


def _prod_others(values: np.ndarray) -> np.ndarray:
    """Row i = product of all rows except i (prefix and suffix products, no division)."""
    m = values.shape[0]
    before = np.ones_like(values)
    after = np.ones_like(values)
    for i in range(1, m):
        before[i] = before[i - 1] * values[i - 1]
        after[m - 1 - i] = after[m - i] * values[m - i]
    return before * after


def _working_counts(sfs: np.ndarray, cdfs: np.ndarray) -> np.ndarray:
    """Row j = P(exactly j parts work) for independent parts (Barlow & Heidtmann 1984)."""
    n = sfs.shape[0]
    counts = np.zeros((n + 1,) + sfs.shape[1:])
    counts[0] = 1.0
    for i in range(n):                               # loop over parts, not samples
        counts[1:i + 2] = counts[1:i + 2] * cdfs[i] + counts[0:i + 1] * sfs[i]
        counts[0] = counts[0] * cdfs[i]
    return counts


def _binomial_split(sf, cdf, n, k):
    """(sum_{i>=k}, sum_{i<k}) of C(n,i) R^i F^(n-i): e-Handbook 8.1.8.4, both tails in logs."""
    i = np.arange(n + 1)[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        log_terms = (special.gammaln(n + 1) - special.gammaln(i + 1) - special.gammaln(n - i + 1)
                     + special.xlogy(i, sf[None, :]) + special.xlogy(n - i, cdf[None, :]))
    terms = np.exp(log_terms)
    return terms[k:].sum(axis=0), terms[:k].sum(axis=0)


_GAUSS_X, _GAUSS_W = np.polynomial.legendre.leggauss(8)


def _adaptive_integral(integrand, problems: int, rows: int, epsrel: float = _EPSREL,
                       max_rounds: int = 80, max_open: int = 1 << 17) -> np.ndarray:
    """integral_0^1 integrand(p, w) dw for problems p = 0..problems-1, each row to ``epsrel``.

    Globally adaptive bisection in the manner of QUADPACK's QAG (Piessens et al. 1983),
    vectorised over every open interval of every problem: an interval's value is 8-point
    Gauss-Legendre on its two halves, its error the difference from the rule on the
    whole; while a problem's summed error exceeds epsrel x |value| (or rounding level),
    its intervals with the largest errors are halved. One numpy call per round, so
    integrals nested in the integrand (standby of three or more parts) stay vectorised.
    ``max_open`` (or 8 per problem) caps the work: beyond it intervals are accepted as they stand.
    """
    def rule(pid, a, b):
        half = 0.5 * (b - a)
        w = (a + half)[:, None] + half[:, None] * _GAUSS_X[None, :]
        values = integrand(np.repeat(pid, _GAUSS_X.size), w.ravel()).reshape(rows, pid.size, _GAUSS_X.size)
        values = np.where(np.isfinite(values), values, 0.0)
        return (np.einsum("rik,k->ri", values, _GAUSS_W) * half,
                np.einsum("rik,k->ri", np.abs(values), _GAUSS_W) * half)

    def refine(pid, a, b, whole):
        """Value, error, halves and magnitude of each interval whose whole-rule value is known."""
        m = 0.5 * (a + b)
        both, size = rule(np.concatenate([pid, pid]), np.concatenate([a, m]), np.concatenate([m, b]))
        k = pid.size
        left, right = both[:, :k], both[:, k:]
        return left + right, np.abs(left + right - whole), left, right, size[:, :k] + size[:, k:]

    def per_problem(values, pid, how=np.add):
        out = np.zeros(values.shape[:-1] + (problems,))
        how.at(out.T, pid, values.T)
        return out

    pid = np.arange(problems)
    a, b = np.zeros(problems), np.ones(problems)
    val, err, left, right, mag = refine(pid, a, b, rule(pid, a, b)[0])
    done = np.zeros((rows, problems))
    for round_ in range(max_rounds):
        if pid.size == 0:
            break
        tol = np.maximum(epsrel * np.abs(per_problem(val, pid)), 64 * np.finfo(float).eps * per_problem(mag, pid))
        ratio = np.max(err / np.where(tol > 0, tol, np.finfo(float).tiny)[:, pid], axis=0)
        finished = per_problem(ratio, pid) <= 1.0
        if round_ == max_rounds - 1 or pid.size > max(max_open, 8 * problems):
            finished[:] = True
        closing = finished[pid]
        done += per_problem(val[:, closing], pid[closing])
        peak = per_problem(ratio, pid, np.maximum)
        split = ~closing & (ratio >= 0.25 * peak[pid])
        stay = ~closing & ~split
        m = 0.5 * (a[split] + b[split])
        halves = refine(np.concatenate([pid[split], pid[split]]), np.concatenate([a[split], m]),
                        np.concatenate([m, b[split]]), np.concatenate([left[:, split], right[:, split]], axis=1))
        pid = np.concatenate([pid[stay], pid[split], pid[split]])
        a = np.concatenate([a[stay], a[split], m])
        b = np.concatenate([b[stay], m, b[split]])
        val, err, left, right, mag = (np.concatenate([old[:, stay], new], axis=1)
                                      for old, new in zip((val, err, left, right, mag), halves))
    return done


def _mean_by_integration(block: _Block) -> float:
    """E[T] = start + integral_start^inf R(t) dt - integral_-inf^start F(t) dt (the last
    term only when lives can fall below ``start``), split at the leaves' quantiles."""
    lo, hi = block.support
    if _tail_too_heavy(block):
        return math.inf
    pts = block._scale_points()
    start = lo if np.isfinite(lo) else min(0.0, float(pts.min()) if pts.size else 0.0)
    inner = pts[(pts > start) & (pts < hi)]
    edges = np.unique(np.concatenate([[start], inner, [hi] if np.isfinite(hi) else []]))
    a, b = edges[:-1], edges[1:]
    spread = max(float(edges[-1] - start), 1.0)
    total = start + _integral_of(lambda t: block._sf_cdf(t)[0], a, b, tail_from=None if np.isfinite(hi) else edges[-1],
                                 tail_scale=spread)
    if not np.isfinite(lo):
        total -= _integral_of(lambda t: block._sf_cdf(t)[1], np.empty(0), np.empty(0), tail_from=start,
                              tail_scale=-spread)
    return float(total)


def _integral_of(fn, a, b, tail_from=None, tail_scale=1.0) -> float:
    """Sum of integral_a^b fn over the pieces, plus the integral from ``tail_from`` to +inf
    (or -inf when ``tail_scale`` < 0) mapped to [0, 1) by t = tail_from + c w / (1 - w)."""
    pieces = a.size
    problems = pieces + (tail_from is not None)
    if problems == 0:
        return 0.0
    a_all = np.concatenate([a, [tail_from if tail_from is not None else 0.0]])
    b_all = np.concatenate([b, [0.0]])

    def integrand(pid, w):
        tail = pid >= pieces
        width = np.where(tail, 0.0, b_all[pid] - a_all[pid])
        with np.errstate(divide="ignore", invalid="ignore"):
            t = np.where(tail, a_all[pid] + tail_scale * w / (1.0 - w), a_all[pid] + width * w)
            jacobian = np.where(tail, abs(tail_scale) / (1.0 - w) ** 2, width)
            return (fn(t) * jacobian)[None, :]
    return float(np.sum(_adaptive_integral(integrand, problems, 1, epsrel=1e-11)))


def _tail_too_heavy(block: _Block) -> bool:
    """Is t R(t) not going to 0 at the far end? (then the mean diverges)"""
    lo, hi = block.support
    if np.isfinite(hi):
        return False
    pts = block._scale_points()
    scale = max(1.0, float(np.max(np.abs(pts))) if pts.size else 1.0)
    big = scale * np.array([1e6, 1e9, 1e12])
    weighted = big * block._sf_cdf(big)[0]
    return bool(weighted[-1] > 1e-9 and weighted[-1] >= 0.5 * weighted[0])


def _plain(value):
    """A spec with infinities made JSON-safe, for comparing parts."""
    if isinstance(value, float) and not math.isfinite(value):
        return repr(value)
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items() if k != "name"}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    return value


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
