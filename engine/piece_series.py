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

NODES = 24
# Relative accuracy demanded of a tabulated value: the quadrature it replaces reaches about 1e-14.
RELATIVE = 1e-14
# Parts of a geometric cut towards an end of a piece: the innermost one is 2^-40 of the piece.
GEOMETRIC_STEPS = 40

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

    ``values`` holds the integrand at ``nodes(edges)`` (pieces x NODES), ``reference`` an adaptive
    quadrature of each whole piece, ``before`` and ``after`` the mass below and above each piece.
    """

    def __init__(self, edges, values, reference, before, after):
        edges = np.asarray(edges, dtype=float)
        half = 0.5 * (edges[1:] - edges[:-1])
        coef = values @ _TO_COEF
        # pieces x 2 x (NODES + 1): the integrals from the start (lower) and to the end (upper) of each
        # piece, written straight into the table the kernel reads.
        table = np.empty((coef.shape[0], 2, NODES + 1))
        np.matmul(coef, _LOWER, out=table[:, 0])
        np.matmul(coef, _UPPER, out=table[:, 1])
        table *= half[:, None, None]
        lower = table[:, 0]
        size = np.abs(lower).sum(axis=1)
        # Resolved: the last three coefficients of the integral at rounding level (ATAP ch. 8, a
        # chebfun-style test), and the series' whole-piece integral equal to the quadrature's. A value
        # that is not finite makes its piece's ``size`` not finite (inf, or NaN from inf * 0).
        tail = np.abs(lower[:, -3:]).sum(axis=1)
        whole = lower.sum(axis=1)                                  # the series at x = 1
        scale = np.abs(reference)
        with np.errstate(invalid="ignore"):
            resolved = (tail <= 1e-15 * scale) & (np.abs(whole - reference) <= 1e-14 * scale) & np.isfinite(size)
        self.edges = edges
        self.resolved = resolved
        self.masses = np.array([before, after], dtype=float)       # 2 x pieces: below and above each
        self.before, self.after = self.masses[0], self.masses[1]
        self.table = table
        # What the series may be off by: its truncation plus the rounding of a sum of such terms;
        # a value is trusted where that is at most RELATIVE of it (never on an unresolved piece).
        self.error = tail + 4e-16 * size
        self.limit = np.where(resolved, self.error / RELATIVE, np.inf)

    @classmethod
    def build(cls, edges, pieces, before, after, integrand, quadrature, *, first_end: bool,
              upper_sums: bool = True, nodes_and_quadrature=None) -> "PieceSeries":
        """The series on a partition with the pieces' masses ``pieces`` (and the masses ``before``
        and ``after`` each); ``integrand(y)`` evaluates the integrand, ``quadrature(a, b)`` integrates
        it over pieces. One refinement follows (``refine``): a piece whose series is not resolved is
        cut in four; a piece whose mass below (above) it is too small to be summed with its own
        series near its start (end) is cut geometrically towards that end, so that small masses keep
        their digits; so is the first piece where ``first_end`` (a finite lower end may hold a pole or
        a fractional power). A geometric cut goes only as deep as that piece needs (``depth``); no cut
        towards an end where ``upper_sums`` is False (only masses below a point will be asked for). Only
        the new parts are evaluated and integrated (in one pass where ``nodes_and_quadrature(a, b)`` gives
        both the integrand at the nodes of the pieces and their integrals)."""
        reference = pieces
        values = integrand(cls.nodes(edges[:-1], edges[1:]))
        series = cls(edges, values, reference, before, after)
        mode = np.where(series.resolved, KEEP, QUARTERS)
        if upper_sums:
            mode[series.resolved & (series.after < series.limit)] = TOWARDS_END
        mode[series.resolved & (series.before < series.limit)] = TOWARDS_START
        if first_end:
            mode[0] = TOWARDS_START
        if np.all(mode == KEEP):
            return series
        steps = np.where(mode == TOWARDS_END, depth(reference, series.after),
                         np.where(mode == TOWARDS_START, depth(reference, series.before), 0))
        if first_end:
            steps[0] = GEOMETRIC_STEPS
        edges, parent, new = refine(edges, mode, steps)
        kept = np.empty((parent.size, NODES))
        kept[~new] = values[parent[~new]]
        fresh = np.empty(parent.size)
        fresh[~new] = reference[parent[~new]]
        a_new, b_new = edges[:-1][new], edges[1:][new]
        if nodes_and_quadrature is not None:
            kept[new], fresh[new] = nodes_and_quadrature(a_new, b_new)
        else:
            kept[new] = integrand(cls.nodes(a_new, b_new))
            fresh[new] = quadrature(a_new, b_new)
        # Masses before and after each part: its whole piece's, plus its siblings' (summed within
        # the piece, so that a tail piece keeps its digits).
        mass_before, mass_after = series.before[parent], series.after[parent]
        starts = np.flatnonzero(np.concatenate([[True], np.diff(parent) > 0]))
        ends = np.concatenate([starts[1:], [parent.size]])
        first, stop = starts[new[starts]], ends[new[starts]]
        if first.size:
            # Each cut piece's parts as one row (zero-padded at the end), summed along the rows: the
            # same left-to-right sums as one cumsum per piece, all at once.
            width = int(np.max(stop - first))
            index = first[:, None] + np.arange(width)[None, :]
            inside = index < stop[:, None]
            rows = np.where(inside, fresh[np.minimum(index, parent.size - 1)], 0.0)
            below = np.cumsum(rows, axis=1) - rows
            # Above: the rows reversed within their own length, so the zero padding stays at the end.
            backwards = np.where(inside, stop[:, None] - 1 - np.arange(width)[None, :], 0)
            flipped = np.where(inside, fresh[backwards], 0.0)
            above = np.cumsum(flipped, axis=1) - flipped
            mass_before[index[inside]] += below[inside]
            mass_after[backwards[inside]] += above[inside]
        # One round only: a second one was measured to double the pieces for a few points fewer.
        return cls(edges, kept, fresh, mass_before, mass_after)

    @staticmethod
    def nodes(a, b):
        """Where the integrand is needed: NODES Chebyshev points on each piece [a_k, b_k]."""
        return 0.5 * (a + b)[:, None] + 0.5 * (b - a)[:, None] * POINTS[None, :]

    def sums(self, y, upper):
        """The mass below y (or above it, where ``upper``: one flag for all points or one per point),
        and where the series can be trusted for it (False: the caller's quadrature must supply that
        point). y inside [edges[0], edges[-1]]."""
        if np.ndim(upper) == 0:
            # One side for all points: a flag per point all alike (no copies of the masses).
            upper = (np.ones if upper else np.zeros)(np.size(y), dtype=bool)
        return kernels.chebyshev_piece_sums(y, self.edges, self.table, upper, self.masses, self.limit)


KEEP, QUARTERS, TOWARDS_START, TOWARDS_END = 0, 1, 2, 3
_QUARTERS = np.arange(4) / 4.0


def depth(mass, beside):
    """Steps of a geometric cut of pieces of mass ``mass`` towards an end with the mass ``beside``
    beyond it. A value next to that end is trusted when the mass beyond its part is at least 1/25 of
    the part's own (the rounding of the part's terms, 4e-16 of them, against RELATIVE = 1e-14 of the
    value). The part at depth j holds at most 2^-j of the piece where the integrand does not rise
    towards that end (a tail), so j = log2(mass / (25 beside)) + 2 leaves a fourfold margin; the
    full GEOMETRIC_STEPS where nothing lies beyond (the last piece) or the ratio is not finite."""
    with np.errstate(divide="ignore", invalid="ignore"):
        j = np.ceil(np.log2(np.abs(mass) / (25.0 * beside))) + 2.0
    return np.where(np.isfinite(j) & (beside > 0), np.clip(j, 1, GEOMETRIC_STEPS), GEOMETRIC_STEPS).astype(np.int64)


def refine(edges, mode, steps=None):
    """Cut each piece as ``mode`` says (KEEP, QUARTERS, or geometrically TOWARDS_START / TOWARDS_END
    in ``steps`` halvings, GEOMETRIC_STEPS unless given: down to 2^-steps of the piece, each part is
    then smooth on its own scale and carries its own small mass). Returns the new edges and, per
    new piece, the index of the piece it came from and whether it is new."""
    a, b = edges[:-1], edges[1:]
    if steps is None:
        steps = np.full(mode.shape, GEOMETRIC_STEPS)
    # Parts per piece: 1 kept, 4 quarters, or 1 + steps for a geometric cut. Each part is written
    # by its place j in its piece: the quarters start at j/4; a cut towards the start starts at 0, then
    # 2^-steps ... 2^-1 (j = 1 .. steps); a cut towards the end at 0, then 1 - 2^-1 ... 1 - 2^-steps,
    # computed as b - w 2^-j next to b (a + w (1 - 2^-j) rounds the small steps away there).
    counts = np.where(mode == KEEP, 1, np.where(mode == QUARTERS, 4, 1 + steps)).astype(np.int64)
    parent = np.repeat(np.arange(a.size), counts)
    j = np.arange(parent.size) - np.repeat(np.cumsum(counts) - counts, counts)
    kind = mode[parent]
    deep = steps[parent]
    width = (b - a)[parent]
    start = a[parent]
    with np.errstate(over="ignore"):
        fraction = np.where(kind == QUARTERS, 0.25 * j,
                            np.where(kind == TOWARDS_START, np.where(j > 0, 2.0 ** (j - 1 - deep), 0.0), 0.0))
    starts = start + width * fraction
    towards_end = (kind == TOWARDS_END) & (j > 0)
    starts[towards_end] = b[parent[towards_end]] - width[towards_end] * 2.0 ** -j[towards_end]
    keep = np.concatenate([[True], np.diff(starts) > 0])     # parts that rounded together are dropped
    starts, parent = starts[keep], parent[keep]
    return np.concatenate([starts, edges[-1:]]), parent, (mode != KEEP)[parent]
