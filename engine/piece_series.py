"""Chebyshev series of a piecewise integral, so that G(y) at many points costs a short sum, not a quadrature.
Interpolation at Chebyshev points, coefficients by the discrete cosine sums, term-by-term integration and
Clenshaw's recurrence (Trefethen, Approximation Theory and Approximation Practice, 2013, ch. 3, 8, 19).

On each piece [a, b] of a partition the integrand is interpolated at ``NODES`` Chebyshev points; the
series' integrals from a and to b are kept. A piece is tabulated only if the series is resolved (its last
coefficients are at rounding level) and agrees with the piece's adaptive quadrature; an evaluation is
trusted only where the rounding of the sum is small beside the value asked for. Everything else stays
with the caller's quadrature, so the series can make evaluations cheaper but never less accurate.
"""
from __future__ import annotations

import numpy as np
from numpy.polynomial import chebyshev

from . import kernels

NODES = 32
# Relative accuracy demanded of a tabulated value: the quadrature it replaces reaches about 1e-14.
RELATIVE = 1e-14

_theta = np.pi * (np.arange(NODES) + 0.5) / NODES
#: Chebyshev points of the first kind on [-1, 1] (ATAP ch. 3 uses the second kind; the first kind
#: never touches an end of the piece, where a mapped integrand may be a limit only).
POINTS = np.cos(_theta)
# c = values @ _TO_COEF: c_m = (2/N) sum_j f(x_j) cos(m theta_j), c_0 halved (ATAP ch. 3 for the first kind).
_TO_COEF = (2.0 / NODES) * np.cos(np.outer(_theta, np.arange(NODES)))
_TO_COEF[:, 0] *= 0.5
# Integrals from -1 (lower) and to +1 (upper) as coefficient maps: chebint of each unit series.
_LOWER = np.stack([chebyshev.chebint(np.eye(NODES)[m], lbnd=-1.0) for m in range(NODES)])
_UPPER = -np.stack([chebyshev.chebint(np.eye(NODES)[m], lbnd=1.0) for m in range(NODES)])


class PieceSeries:
    """Integrals of one integrand over parts of each piece [edges[k], edges[k+1]], as Chebyshev series.

    ``values`` holds the integrand at ``nodes(edges)`` (pieces x NODES); ``pieces`` the adaptive
    quadrature of each whole piece and ``floor`` the absolute accuracy the caller asks of it.
    """

    def __init__(self, edges, values, pieces, floor: float):
        half = 0.5 * np.diff(edges)
        coef = values @ _TO_COEF
        lower = (coef @ _LOWER) * half[:, None]
        upper = (coef @ _UPPER) * half[:, None]
        size = np.sum(np.abs(lower), axis=1)
        # Resolved: the last three coefficients at rounding level (ATAP ch. 8, a chebfun-style test),
        # and the series' whole-piece integral equal to the adaptive quadrature's.
        tail = np.sum(np.abs(lower[:, -3:]), axis=1)
        whole = lower[:, 0] + np.sum(lower[:, 1:], axis=1)         # the series at x = 1
        with np.errstate(invalid="ignore"):
            resolved = ((tail <= 1e-15 * np.abs(pieces))
                        & (np.abs(whole - pieces) <= 1e-14 * np.abs(pieces))
                        & np.all(np.isfinite(coef), axis=1))
        self.edges = np.asarray(edges, dtype=float)
        self.resolved = resolved
        self.table = np.ascontiguousarray(np.stack([lower, upper], axis=1))   # pieces x 2 x (NODES + 1)
        # What the series may be off by: its truncation plus the rounding of a sum of such terms.
        self.error = tail + 4e-16 * size

    @staticmethod
    def nodes(edges):
        """Where the integrand is needed: NODES Chebyshev points on each piece."""
        a, b = edges[:-1], edges[1:]
        return 0.5 * (a + b)[:, None] + 0.5 * (b - a)[:, None] * POINTS[None, :]

    def partial(self, y, k, base, upper: bool):
        """base + (integral of the piece from its start to y, or from y to its end), and where the
        series can be trusted for it (False: the caller's quadrature must supply that point)."""
        a, b = self.edges[k], self.edges[k + 1]
        x = np.clip((2.0 * y - a - b) / (b - a), -1.0, 1.0)
        part = kernels.chebyshev_sum(x, k, self.table, 1 if upper else 0)
        value = base + part
        trusted = self.resolved[k] & (self.error[k] <= RELATIVE * np.abs(value))
        return value, trusted
