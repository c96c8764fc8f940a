"""The model's cdf as a table fast enough to test every batch, and the histogram's bins.
Linear interpolation between exact cdf values at quantile-placed nodes; exact cdf in the tails and at atoms."""
from __future__ import annotations

import math

import numpy as np


HIST_BINS = 160
CDF_NODES = 1025
TAIL_NODES = 64
# The histogram spans the model's (LOW_Q, FAR_Q) quantiles; the linear view crops at VIEW_Q.
LOW_Q, VIEW_Q, FAR_Q = 5e-4, 0.9995, 1 - 1e-5


# ---- the model's cdf, fast enough to test every batch ---------------------------------------

class CdfTable:
    """F at ~1000 nodes placed at quantiles of a probe sample, interpolated linearly in the bulk.

    The values at the nodes are the model's exact cdf (the probe only decides
    where the nodes go, so a faulty sampler cannot bias them). Between nodes the
    error is about the change of F's slope across one node gap times the gap,
    below 1e-5 here: far below the KS resolution 1/sqrt(n) of any live sample. Beyond
    the probe's TAIL_NODES-th smallest and largest values, where nodes would be
    sparse and F may bend sharply (a density pole, a hazard growing exponentially),
    the exact cdf is used: a fraction 2 * TAIL_NODES / probe size of the draws.
    Targets with atoms (product-limit) use their exact cdf, which is cheap, and
    the left limit F(x-) needed at an atom.
    """

    def __init__(self, target, probe: np.ndarray):
        self.target = target
        self.atoms = np.asarray(target.atoms, dtype=float)
        probe = np.sort(probe[np.isfinite(probe)])
        if probe.size > 4 * TAIL_NODES:
            inner = probe[TAIL_NODES:-TAIL_NODES]
            # Geometric steps in probability towards both ends keep |error| ~ step^2 / F
            # small where F (or 1 - F) is small and curved, as near a density pole.
            ends = np.geomspace(1e-4, 0.05, 250)
            p = np.unique(np.concatenate([np.linspace(0.0, 1.0, CDF_NODES), ends, 1.0 - ends]))
            self.nodes = np.unique(np.quantile(inner, p))
        else:
            self.nodes = np.empty(0)
        self.values = np.maximum.accumulate(np.asarray(target.cdf(self.nodes), dtype=float))

    @property
    def exact(self) -> bool:
        return self.atoms.size > 0 or self.nodes.size < 2

    def cdf(self, x: np.ndarray) -> np.ndarray:
        if self.exact:
            return np.asarray(self.target.cdf(x), dtype=float)
        out = np.interp(x, self.nodes, self.values)
        outside = (x < self.nodes[0]) | (x > self.nodes[-1])
        if outside.any():
            out[outside] = self.target.cdf(x[outside])
        return out

    def cdf_left(self, x: np.ndarray) -> np.ndarray:
        """F(x-): differs from F(x) only at an atom."""
        if not self.atoms.size:
            return self.cdf(x)
        out = self.cdf(x)
        on = np.isin(x, self.atoms)
        if on.any():
            out[on] = self.target.cdf(np.nextafter(x[on], -np.inf))
        return out

    def quantile(self, p) -> np.ndarray:
        """Model quantiles by inverse interpolation of the table (for plotting only)."""
        p = np.asarray(p, dtype=float)
        if self.exact:
            return np.asarray(self.target.quantile(p), dtype=float)
        values, first = np.unique(self.values, return_index=True)
        return np.interp(p, values, self.nodes[first])


def histogram_edges(target, table: CdfTable) -> tuple[np.ndarray, float]:
    """Equal-width bins from the model's LOW_Q quantile (or the start of its support) to FAR_Q;
    returns the edges and the right end of the linear view (the VIEW_Q quantile)."""
    lo, hi = target.support
    # Exact quantiles: the far tail lies beyond the probe that placed the table's nodes.
    q_low, q_view, q_far = (float(v) for v in target.quantile(np.array([LOW_Q, VIEW_Q, FAR_Q])))
    left = lo if math.isfinite(lo) else q_low
    right = min(hi, q_far) if math.isfinite(hi) else q_far
    if not right > left:
        right = left + max(abs(left), 1.0)
    return np.linspace(left, right, HIST_BINS + 1), min(max(q_view, left), right)
