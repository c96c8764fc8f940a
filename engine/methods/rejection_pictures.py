"""The hat and squeeze of a rejection sampler as functions of age, and the picture of the
method: density, hat, squeeze, construction points, pieces, and a batch of labelled candidates.

The pictures follow the construction of transformed density rejection (Hörmann 1995, ACM TOMS
21(2) 182-193): what is drawn is exactly what the sampler uses, never a re-derivation.
"""
from __future__ import annotations

from typing import Any

import numpy as np


class HatPictures:
    """Hat and squeeze functions and the geometry of ``Rejection`` (mixed in)."""

    def _lookup(self, x):
        """The drawing table's hat row that holds each x (rows run left to right)."""
        x = np.asarray(x, dtype=float)
        rows = self._table[1:-1]
        left = np.where(rows[:, 7] > 0, rows[:, 6], rows[:, 6] - rows[:, 2])
        j = np.clip(np.searchsorted(left, x, side="right") - 1, 0, left.size - 1)
        inside = (x >= self.cL) & (x <= self.cR)
        return x, rows[j], inside

    def hat(self, x):
        """The hat h(x) >= f(x) the draws use on [cL, cR] (flat steps where the exponential
        segments were cut, see rejection_drawing.drawing_rows); f itself where inversion draws."""
        x, row, inside = self._lookup(x)
        with np.errstate(over="ignore", invalid="ignore"):
            h = np.exp(row[:, 8] + row[:, 9] * (x - row[:, 6]) * row[:, 7])
        return np.where(inside, h, self.target.pdf(x))

    def squeeze(self, x):
        """The squeeze s(x) <= f(x) on [cL, cR] (0 where an interval has none); f outside."""
        x, row, inside = self._lookup(x)
        with np.errstate(over="ignore", invalid="ignore"):
            s = np.exp(row[:, 10] + row[:, 11] * (x - row[:, 6]))
        return np.where(inside, s, self.target.pdf(x))

    @property
    def domain(self) -> tuple[float, float]:
        """(cL, cR): the hat covers this range; below and above, draws come from inversion."""
        return self.cL, self.cR

    def hat_geometry(self, n_points: int = 400, rng=0) -> dict[str, Any]:
        """The picture ``Rejection.geometry`` returns (its size argument is checked there)."""
        t = self.target
        lo, hi = self.cL, self.cR
        p = np.linspace(0.0, 1.0, n_points)
        xq = t.quantile(np.clip(self.FL + p * (1 - self.FL - self.SR), 0.0, 1.0))
        x = np.unique(np.concatenate([np.linspace(lo, hi, n_points), xq, self.points_x]))
        x = x[(x >= lo) & (x <= hi)]
        cx, cy, label = self._labelled_candidates(max(n_points, 1), np.random.default_rng(rng))
        return {
            "method": self.method,
            "x": x, "f": t.pdf(x), "hat": self.hat(x), "squeeze": self.squeeze(x),
            "points": self.points_x.copy(), "points_f": np.exp(self.points_logf),
            "interval_convex": self.interval_labels > 0,
            "piece_edges": self.piece_edges.copy(), "piece_convex": self.piece_convex.copy(),
            "domain": (lo, hi), "inversion_mass_left": self.FL, "inversion_mass_right": self.SR,
            "candidates": {"x": cx, "y": cy, "label": label},
            "expected_acceptance": 1.0 / self.total,
        }

    def _labelled_candidates(self, n, gen):
        """Candidates on the hat, as the drawing loop decides them: (x, height, label).
        A candidate accepted at once below its row's squeeze floor r has no height of its
        own (that is the saving); the picture gives it one, uniform on [0, r h(x)]."""
        u = gen.random(n)
        k = np.minimum(np.searchsorted(self.cum, u * self.total, side="right"), self._last)
        floor = self._table[k, 12]
        v, x, loghat = np.empty(n), np.empty(n), np.empty(n)
        status = np.empty(n, dtype=np.int8)
        self._candidate_pass(u, v, x, loghat, status)
        on_hat = (status == 0) | (status == 1)
        with np.errstate(over="ignore", invalid="ignore"):
            hat = np.exp(loghat)
            height = np.where(status == 1, v + gen.random(n) * (1.0 - v), floor * gen.random(n)) * hat
            squeezed = (status == 0) | (height <= np.exp(u) * hat)
        label = np.where(squeezed, "squeeze", "rejected").astype(object)
        test = (status == 1) & ~squeezed
        label[test] = np.where(height[test] <= self.target.pdf(x[test]), "accepted", "rejected")
        return x[on_hat], height[on_hat], label[on_hat].astype(str)
