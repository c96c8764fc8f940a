"""Table methods for binned and discrete targets: pick a bin (or atom) with the
alias method or a guide table, then place the draw exactly within it.

Alias method: Walker (1977), ACM TOMS 3(3) 253-256, with Vose's (1991) O(K)
construction (IEEE TSE 17(9)); guide table: Chen & Asau (1974), J. Chinese
Inst. Eng.; within a bin the exact inverse of the uniform law.
"""
from __future__ import annotations

from typing import Any

import numpy as np

from .. import table_checks
from ..errors import MethodNotApplicable, ModelError
from ..field_data import HistogramTarget, ProductLimitTarget
from ..target import Target
from .base import Sampler


def alias_table(p: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Walker's alias table by Vose's construction: (keep probability, alias index).

    Bin i is drawn with probability p_i when a uniform column index i is kept
    with probability keep[i] and otherwise replaced by alias[i].
    """
    p = np.asarray(p, dtype=float)
    k = p.size
    scaled = p * k / p.sum()
    keep = np.ones(k)
    alias = np.arange(k)
    small = [i for i in range(k) if scaled[i] < 1.0]
    large = [i for i in range(k) if scaled[i] >= 1.0]
    # Set-up loop over bins (not over samples): each step settles one column.
    while small and large:
        s, g = small.pop(), large.pop()
        keep[s] = scaled[s]
        alias[s] = g
        scaled[g] = (scaled[g] + scaled[s]) - 1.0
        (small if scaled[g] < 1.0 else large).append(g)
    for i in small + large:   # what is left is 1 up to rounding
        keep[i] = 1.0
    return keep, alias


def guide_table(cumulative: np.ndarray, size: int) -> np.ndarray:
    """guide[j] = first bin whose cumulative upper end exceeds j/size (Chen & Asau 1974)."""
    levels = np.arange(size) / size
    return np.searchsorted(cumulative[1:], levels, side="right").astype(np.int64)


class TableSampler(Sampler):
    """Alias (default) or guide-table choice of a bin, then exact placement within it."""

    method = "table"
    reference = "Walker (1977) alias method with Vose (1991) set-up; guide table: Chen & Asau (1974)"

    def __init__(self, target: Target, tolerance: float = 1e-10, picker: str = "alias"):
        super().__init__(target, tolerance)
        if picker not in ("alias", "guide"):
            raise ModelError("picker", f"must be 'alias' or 'guide', got {picker!r}")
        self.picker = picker

    @classmethod
    def check_applicable(cls, target: Target) -> None:
        if isinstance(target, HistogramTarget):
            if target.smooth:
                raise MethodNotApplicable("method", "the smoothed histogram has a continuous density; "
                                                    "the table method serves the uniform-within-bin model "
                                                    "(use inversion for the smooth one)")
            return
        if isinstance(target, ProductLimitTarget):
            return
        raise MethodNotApplicable("method", "the table method serves binned or discrete targets "
                                            "(histograms, product-limit estimates); this model is continuous")

    def _setup(self) -> None:
        t = self.target
        if isinstance(t, HistogramTarget):
            self.kind = "bins"
            self.p = t.probabilities.copy()
            self.left = t.edges[:-1].copy()
            self.width = t.widths.copy()
        else:
            self.kind = "atoms"
            p = t._atom_p.copy()
            self.left = t.atoms.copy()
            self.width = np.zeros_like(self.left)
            if t.tail is not None:
                # One extra slot for the mass beyond the last observation,
                # drawn exactly by inversion of the fitted tail.
                p = np.concatenate([p, [t.tail_mass]])
                self.left = np.concatenate([self.left, [t.last_time]])
                self.width = np.concatenate([self.width, [0.0]])
            self.p = p
        self.p = self.p / self.p.sum()
        self.cumulative = np.concatenate([[0.0], np.cumsum(self.p)])
        self.cumulative[-1] = 1.0
        self.keep, self.alias = alias_table(self.p)
        self.guide = guide_table(self.cumulative, max(self.p.size, 1))
        self.extra_stats.update({"picker": self.picker, "bins": int(self.p.size),
                                 "u_error": self._u_error()})

    @property
    def _has_tail(self) -> bool:
        return self.kind == "atoms" and getattr(self.target, "tail", None) is not None

    def _pick(self, m, rng):
        k = self.p.size
        if self.picker == "alias":
            u = rng.random(m)
            col = np.minimum((u * k).astype(np.int64), k - 1)
            v = rng.random(m)
            self.counts["uniforms"] += 2 * m
            return np.where(v < self.keep[col], col, self.alias[col])
        u = rng.random(m)
        self.counts["uniforms"] += m
        g = np.minimum((u * self.guide.size).astype(np.int64), self.guide.size - 1)
        j = self.guide[g]
        for _ in range(k):
            step = (j < k - 1) & (self.cumulative[np.minimum(j + 1, k)] <= u)
            if not step.any():
                break
            j = j + step
        return j

    def _draw(self, m, rng):
        j = self._pick(m, rng)
        if self.kind == "bins":
            w = rng.random(m)
            self.counts["uniforms"] += m
            return self.left[j] + w * self.width[j]
        x = self.left[j].copy()
        if self._has_tail:
            in_tail = j == self.p.size - 1
            n_tail = int(in_tail.sum())
            if n_tail:
                t = self.target
                v = rng.random(n_tail)
                self.counts["uniforms"] += n_tail
                x[in_tail] = t.last_time + t.tail.isf(v)
        return x

    def _u_error(self) -> float:
        """Largest gap between the table's bin shares and the target's own."""
        t = self.target
        if self.kind == "bins":
            model = t.cdf(t.edges)
            return float(np.max(np.abs(model - self.cumulative)))
        return float(np.max(np.abs(np.cumsum(t._atom_p) - self.cumulative[1:t.atoms.size + 1])))

    def geometry(self, n_points: int = 400, rng=0) -> dict[str, Any]:
        return {"method": self.method, "kind": self.kind, "left": self.left, "width": self.width,
                "probability": self.p, "keep": self.keep, "alias": self.alias,
                "tail": bool(self._has_tail)}

    def _tables(self):
        return {"p": self.p, "left": self.left, "width": self.width, "keep": self.keep,
                "alias": self.alias, "guide": self.guide, "cumulative": self.cumulative}

    def _meta(self):
        return {"picker": self.picker, "kind": self.kind, "u_error": self.extra_stats["u_error"]}

    def _restore(self, meta, tables):
        # Every table is checked against the others before a draw indexes with it.
        self.picker = table_checks.choice(meta, "picker", ("alias", "guide"))
        self.kind = table_checks.choice(meta, "kind", ("bins", "atoms"))
        self.p = table_checks.table(tables, "p", low=0.0, high=1.0)
        k = self.p.size
        if not abs(float(np.sum(self.p)) - 1.0) <= 1e-9:
            raise ModelError("path", "the sampler file's 'p' table does not sum to 1; the file is damaged")
        self.left = table_checks.table(tables, "left", length=k)
        self.width = table_checks.table(tables, "width", length=k, low=0.0)
        self.keep = table_checks.table(tables, "keep", length=k, low=0.0, high=1.0)
        self.alias = table_checks.table(tables, "alias", kind="int", length=k, low=0, high=k - 1)
        self.cumulative = table_checks.table(tables, "cumulative", length=k + 1, low=0.0, high=1.0,
                                             nondecreasing=True)
        self.guide = table_checks.table(tables, "guide", kind="int", low=0, high=k - 1)
        if self.kind == "atoms" and np.any(self.width != 0):
            raise ModelError("path", "the sampler file's 'width' table gives atoms a width; the file is damaged")
        u_error = table_checks.number(meta, "u_error", low=0.0, optional=True)
        self.extra_stats.update({"picker": self.picker, "bins": int(k), "u_error": u_error})
