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
        x = np.asarray(x, dtype=float)
        j = np.clip(np.searchsorted(self.seg_x0, x, side="right") - 1, 0, self.seg_x0.size - 1)
        inside = (x >= self.cL) & (x <= self.cR)
        return x, j, inside

    def hat(self, x):
        """The hat h(x) >= f(x) on the hat's domain [cL, cR]; f itself where inversion draws."""
        x, j, inside = self._lookup(x)
        with np.errstate(over="ignore", invalid="ignore"):
            h = np.exp(self.seg_ya[j] + self.seg_slope[j] * (x - self.seg_xa[j]))
        return np.where(inside, h, self.target.pdf(x))

    def squeeze(self, x):
        """The squeeze s(x) <= f(x) on [cL, cR] (0 where an interval has none); f outside."""
        x, j, inside = self._lookup(x)
        with np.errstate(over="ignore", invalid="ignore"):
            s = np.exp(self.seg_qa[j] + self.seg_qslope[j] * (x - self.seg_xa[j]))
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
        gen = np.random.default_rng(rng)
        cx, cv, loghat, logsq, exact, _ = self._propose(max(n_points, 1), gen)
        accepted, squeezed, _ = self._decide(cx, cv, loghat, logsq, exact)
        on_hat = ~exact
        label = np.where(squeezed, "squeeze", np.where(accepted, "accepted", "rejected"))[on_hat]
        return {
            "method": self.method,
            "x": x, "f": t.pdf(x), "hat": self.hat(x), "squeeze": self.squeeze(x),
            "points": self.points_x.copy(), "points_f": np.exp(self.points_logf),
            "interval_convex": self.interval_labels > 0,
            "piece_edges": self.piece_edges.copy(), "piece_convex": self.piece_convex.copy(),
            "domain": (lo, hi), "inversion_mass_left": self.FL, "inversion_mass_right": self.SR,
            "candidates": {"x": cx[on_hat], "y": (cv * np.exp(loghat))[on_hat], "label": label},
            "expected_acceptance": 1.0 / self.total,
        }
