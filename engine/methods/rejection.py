"""Rejection from an automatic hat: piecewise-exponential upper and lower bounds of the
density, built from the concave and convex pieces of log f, with exact inversion at the ends.

Transformed density rejection with T = log (Gilks & Wild 1992, Appl. Statist. 41(2) 337-348;
Hörmann 1995, ACM TOMS 21(2) 182-193), generalised to log f that is concave on some pieces and
convex on others (Evans & Swartz 1998, J. Comput. Graph. Statist. 7(4) 514-528): on a concave
piece tangents of log f are the hat and chords the squeeze; on a convex piece the chord is the
hat and tangents the squeeze. Construction points are added by derandomised adaptive rejection
sampling (DARS; Leydold, Janka & Hörmann 2002, "Variants of transformed density rejection and
correlation induction", Monte Carlo and Quasi-Monte Carlo Methods 2000, 345-356).

The two ends of the support are cut off and drawn exactly by inversion (composition): a
pole at the lower end (mass POLE_MASS) and the tails beyond mass 0.01 * tolerance, so the
hat never relies on the shape of log f where it was not examined. Piece boundaries (the
inflexion points of log f, kinks declared by the model, jumps found by a scan) are located
numerically; a check of hat >= f >= squeeze on a dense grid in every interval follows. Every
hat is then lifted (every squeeze lowered) by the noise with which f can be computed (the
models' accuracy, and the slope times the spacing of doubles) plus twice any excess the
check found, which only rounding or the numerical slopes of a model without an exact f'
can leave; the stats report that excess ("check_excess") and any repairs.
"""
from __future__ import annotations

import math
import threading
import time
from typing import Any

import numpy as np

from .. import kernels, table_checks
from ..errors import MethodNotApplicable, ModelError, finite_number, sample_size
from ..target import Target
from .base import Sampler, check_output_buffer

ACCEPTANCE = 0.9          # default goal for area(f) / area(hat)
MAX_POINTS = 200          # default budget of construction points
TIME_BUDGET = 0.5         # default set-up budget in seconds
POLE_MASS = 1e-3          # mass next to a pole at the lower end that inversion draws
DARS_FACTOR = 0.99        # split intervals whose hat - squeeze area exceeds this times the mean
SCAN_QUANTILES = 385      # bulk of the scan grid (equal steps in probability)
SCAN_TAIL = 48            # per tail (geometric steps in probability)
SCAN_SPREAD = 400         # equal (or geometric) steps in t, for regions of little mass
SCAN_MAX = 20_000         # the scan stops refining beyond this many points
CHECK_POINTS = 16         # per interval, for the hat >= f >= squeeze check
BIG_EXCESS = 1e-6         # a log-excess this large means a misplaced boundary: split there
# Relative accuracy to which models evaluate f (a numerical cumulative hazard or
# normalising area is good to ~1e-13): every hat is lifted, every squeeze lowered, by this.
F_NOISE = 1e-11
_EPS = np.finfo(float).eps


def _parts(target: Target):
    """The target and every model it is built from (mixture/competing components, residual base)."""
    yield target
    for c in getattr(target, "components", ()) or ():
        yield from _parts(c)
    base = getattr(target, "base", None)
    if isinstance(base, Target):
        yield from _parts(base)


def _declared_kinks(target: Target) -> np.ndarray:
    """Ages where the model says f may jump or kink (component support ends, bin edges)."""
    if hasattr(target, "breakpoints"):
        pts = list(target.breakpoints())
    elif isinstance(getattr(target, "base", None), Target) and hasattr(target, "age"):
        # A residual life X = T - age inherits the base model's breakpoints, shifted.
        pts = [b - target.age for b in _declared_kinks(target.base)]
    else:
        pts = []
    lo, hi = target.support
    return np.unique(np.array([p for p in pts if lo < p < hi], dtype=float))


def _psi(y):
    """(1 - exp(-y)) / y for y >= 0, with its limit 1 at y = 0."""
    y = np.asarray(y, dtype=float)
    safe = np.where(y > 1e-12, y, 1.0)
    return np.where(y > 1e-12, -np.expm1(-safe) / safe, 1.0 - 0.5 * y)


def _exp_line_area(l0, l1, width):
    """Integral over [x0, x0 + width] of exp(line) with end values l0, l1 (logs); 0 if either is -inf."""
    top = np.maximum(l0, l1)
    with np.errstate(invalid="ignore", over="ignore"):
        drop = np.abs(l1 - l0)
        out = np.exp(top) * width * _psi(np.where(np.isfinite(drop), drop, 0.0))
    return np.where(np.isfinite(l0) & np.isfinite(l1), out, 0.0)


class Rejection(Sampler):
    """Rejection from a piecewise-exponential hat with a squeeze, set up automatically.

    Needs a density that is positive and bounded between the ends of the support (a pole
    is allowed at the lower end, where the first POLE_MASS of probability is drawn by
    inversion). f' comes from ``target.dpdf`` when the model has an exact one, otherwise
    from a five-point difference of log f. Options: ``acceptance`` (goal for the
    acceptance rate, default 0.9), ``max_points`` (construction points, default 200),
    ``time_budget`` (set-up seconds, default 0.5); the stats say what was reached.
    """

    method = "rejection"
    reference = ("Transformed density rejection, T = log: Gilks & Wild (1992) Appl. Statist. 41(2); "
                 "Hörmann (1995) ACM TOMS 21(2):182-193; convex pieces: Evans & Swartz (1998) "
                 "JCGS 7(4); construction points: DARS, Leydold, Janka & Hörmann (2002)")

    def __init__(self, target: Target, tolerance: float = 1e-10, acceptance: float = ACCEPTANCE,
                 max_points: int = MAX_POINTS, time_budget: float = TIME_BUDGET):
        super().__init__(target, tolerance)
        self.acceptance = finite_number("acceptance", acceptance, low=0.05, high=0.999)
        points = finite_number("max_points", max_points, low=8, high=100_000)
        if points != int(points):
            raise ModelError("max_points", f"must be a whole number, got {max_points!r}")
        self.max_points = int(points)
        self.time_budget = finite_number("time_budget", time_budget, positive=True, high=600)

    # ---- applicability -------------------------------------------------------------------
    @classmethod
    def check_applicable(cls, target: Target) -> None:
        if target.atoms.size:
            raise MethodNotApplicable("method", "the model puts probability on single ages (atoms, as a "
                                                "product-limit estimate does); a hat over a density cannot "
                                                "produce them: use 'table' or 'inversion'")
        if any(getattr(p, "kind", "") == "histogram" for p in _parts(target)):
            raise MethodNotApplicable("method", "binned data: its density breaks at every bin edge (constant "
                                                "within bins, or a smoothed cubic that vanishes in empty bins); "
                                                "'table' or 'inversion' draw it exactly")

    # ---- log f and its slope -------------------------------------------------------------
    def _logf(self, x):
        with np.errstate(all="ignore"):
            return np.asarray(self.target.logpdf(np.asarray(x, dtype=float)), dtype=float)

    def _slope(self, x):
        """d log f / dt at x (NaN where it cannot be had without crossing a kink or an end)."""
        x = np.asarray(x, dtype=float)
        if x.size == 0:
            return np.empty(0)
        t = self.target
        if self._exact_dpdf:
            with np.errstate(all="ignore"):
                return np.asarray(t.dpdf(x), dtype=float) / np.asarray(t.pdf(x), dtype=float)
        lo, hi = t.support
        # The step follows the length over which log f changes: the spread in the bulk,
        # the distance to the median in a heavy tail, the distance to a finite end there.
        length = np.maximum(np.abs(x - self._median), self._spread)
        if np.isfinite(lo):
            length = np.minimum(length, x - lo)
        if np.isfinite(hi):
            length = np.minimum(length, hi - x)
        h = 1e-3 * length                      # ~ eps**(1/5): balances truncation and rounding
        if self._kinks.size:
            # The stencil must not straddle a kink or jump of f.
            k = np.clip(np.searchsorted(self._kinks, x), 1, self._kinks.size) - 1
            near = np.minimum(np.abs(x - self._kinks[k]),
                              np.abs(x - self._kinks[np.minimum(k + 1, self._kinks.size - 1)]))
            h = np.minimum(h, near / 2.5)
        steps = np.array([-2.0, -1.0, 1.0, 2.0])
        ell = self._logf(x[:, None] + h[:, None] * steps[None, :])
        # Five-point central difference, truncation error h^4 f^(5) / 30.
        with np.errstate(all="ignore"):
            d = (ell[:, 0] - 8.0 * ell[:, 1] + 8.0 * ell[:, 2] - ell[:, 3]) / (12.0 * h)
        return np.where(h > 0, d, np.nan)

    def _point_values(self, x, kind):
        """(log f from the left, log f from the right, slope) at construction points.

        kind 0: an ordinary point; 1: a kink or jump (one-sided values, no slope);
        2: a finite end of the support with f > 0 there (one-sided value, no slope).
        """
        x = np.asarray(x, dtype=float)
        kind = np.asarray(kind)
        lo, hi = self.target.support
        # At a kink the two one-sided limits differ; at an end only the inner one exists.
        below = np.where((kind == 1) | ((kind == 2) & (x >= hi)), np.nextafter(x, -np.inf), x)
        above = np.where((kind == 1) | ((kind == 2) & (x <= lo)), np.nextafter(x, np.inf), x)
        below = np.where((kind == 2) & (x <= lo), above, below)
        above = np.where((kind == 2) & (x >= hi), below, above)
        left, right = self._logf(below), self._logf(above)
        ordinary = kind == 0
        d = np.full(x.shape, np.nan)
        d[ordinary] = self._slope(x[ordinary])
        return left, right, d

    # ---- set-up ------------------------------------------------------------------------------
    def _setup(self) -> None:
        start = time.perf_counter()
        t = self.target
        self._exact_dpdf = t._dpdf_exact() is not None
        self._probe_quantiles()
        q = self._q
        self._median = float(q[0.5])
        self._spread = float(max((q[0.9] - q[0.1]) / 2.0, 1e-300, 1e-12 * abs(q[0.5])))
        self._kinks = _declared_kinks(t)
        self._ends()
        self._kinks = self._kinks[(self._kinks > self.cL) & (self._kinks < self.cR)]
        pieces = self._scan()
        pts = self._initial_points(pieces)
        reached = self._refine(pts, start)
        self._check_and_lift(pts)
        self._finish(pts, pieces, reached)

    def _probe_quantiles(self) -> None:
        """Every quantile the set-up needs, in one call each for the lower and upper tail
        (a model without a closed-form inverse pays a root search per call)."""
        t = self.target
        q_end = 0.01 * self.tolerance
        self._tail_p = np.geomspace(q_end, 0.02, SCAN_TAIL)
        self._bulk_p = np.linspace(0.02, 0.98, SCAN_QUANTILES)
        self._start_p = np.concatenate([[1e-6, 1e-3], np.linspace(0.025, 0.975, 20)])
        p = np.unique(np.concatenate([self._tail_p, self._bulk_p, self._start_p, [0.1, 0.5, 0.9, POLE_MASS]]))
        v = np.unique(np.concatenate([self._tail_p, [1e-6, 1e-3]]))
        self._q = dict(zip(p.tolist(), np.asarray(t.quantile(p), dtype=float).tolist()))
        self._isf = dict(zip(v.tolist(), np.asarray(t.isf(v), dtype=float).tolist()))

    def _regular_end(self, end: float, inward: float) -> bool:
        """Is f positive, finite and locally flat at a finite end (so no cut is needed)?"""
        probe = np.array([np.nextafter(end, end + inward), end + inward * 1e-6 * self._spread])
        with np.errstate(all="ignore"):
            v = np.asarray(self.target.pdf(probe), dtype=float)
        return bool(np.all(np.isfinite(v)) and v[0] > 0 and v[1] > 0 and 0.5 < v[0] / v[1] < 2.0)

    def _ends(self) -> None:
        """Where the hat starts and ends, and the masses beyond that inversion draws."""
        t = self.target
        lo, hi = t.support
        # Beside a finite end where f is 0 or infinite, log f changes by a lot between
        # neighbouring doubles when the end is far from 0 (a location parameter); the hat
        # starts where ages are resolved to ~1e-9 relative to the distance from the end.
        resolved = 2.0**30
        if np.isfinite(lo) and not t.pole_at_lower and self._regular_end(lo, 1.0):
            self.cL, self.FL = lo, 0.0
        else:
            self.cL = self._q[POLE_MASS if t.pole_at_lower else float(self._tail_p[0])]
            if np.isfinite(lo):
                self.cL = max(self.cL, lo + resolved * np.spacing(abs(lo)))
            self.FL = float(t.cdf(self.cL))
        if np.isfinite(hi) and self._regular_end(hi, -1.0):
            self.cR, self.SR = hi, 0.0
        else:
            self.cR = self._isf[float(self._tail_p[0])]
            if np.isfinite(hi):
                self.cR = min(self.cR, hi - resolved * np.spacing(abs(hi)))
            self.SR = float(t.sf(self.cR))
        if not (np.isfinite(self.cL) and np.isfinite(self.cR) and self.cL < self.cR):
            raise MethodNotApplicable("method", "could not place the hat: the model's quantiles at the "
                                                f"cut masses are ({self.cL:g}, {self.cR:g})")

    def _scan(self):
        """Dense look at log f: jumps, inflexion points and the concave/convex pieces.

        Returns the pieces as rows (start, end, label), label -1 where log f is concave
        and +1 where it is convex; keeps the modes found on the way for construction points.
        """
        lo = self.target.support[0]
        cL, cR = self.cL, self.cR
        xq = np.array(list(self._q.values()) + list(self._isf.values()))
        xq = xq[np.isfinite(xq) & (xq > cL) & (xq < cR)]
        # Regions of little mass (valleys between modes) need points too: steps in t,
        # geometric from a finite lower end when the range spans decades.
        anchor = lo if np.isfinite(lo) else None
        first = cL if cL > lo else (xq.min() if xq.size else cL)
        if anchor is not None and first > anchor and (cR - anchor) > 8 * (first - anchor):
            xs = anchor + np.geomspace(first - anchor, cR - anchor, SCAN_SPREAD)
        else:
            xs = np.linspace(cL, cR, SCAN_SPREAD)
        x = np.unique(np.concatenate([[cL, cR], xq, xs[(xs > cL) & (xs < cR)], self._kinks]))
        kind = self._kinds(x)
        lm, lp, d = self._point_values(x, kind)
        self._require_finite(x, lm, lp)
        jumps = self._find_jumps(x, lm, lp, d)
        if jumps.size:
            self._kinks = np.unique(np.concatenate([self._kinks, jumps]))
            x = np.unique(np.concatenate([x, jumps]))
            kind = self._kinds(x)
            lm, lp, d = self._point_values(x, kind)
            self._require_finite(x, lm, lp)
        self._check_kinks()
        x, kind, lm, lp, d = self._resolve(x, kind, lm, lp, d)
        lab = self._cell_labels(x, lm, lp, d)
        bounds = self._inflexions(x, kind, lab)
        edges = np.unique(np.concatenate([[cL, cR], self._kinks, bounds]))
        mids = 0.5 * (x[:-1] + x[1:])
        piece_of_cell = np.clip(np.searchsorted(edges, mids) - 1, 0, edges.size - 2)
        votes = np.zeros(edges.size - 1)
        np.add.at(votes, piece_of_cell, lab * (x[1:] - x[:-1]))
        plab = np.where(votes > 0, 1, -1)
        pieces = np.column_stack([edges[:-1], edges[1:], plab])
        self._modes = self._find_modes(x, d, kind)
        return pieces

    def _resolve(self, x, kind, lm, lp, d):
        """Refine the scan until every cell sees log f as nearly quadratic.

        A cell is halved while the slope at its midpoint is off the mean of its end
        slopes, or the slope changes a lot across it: two inflexion points inside one
        cell (a wiggle) would otherwise go unseen.
        """
        for _ in range(12):
            a, b = x[:-1], x[1:]
            mid = 0.5 * (a + b)
            dm = self._slope(mid)
            with np.errstate(invalid="ignore"):
                bend = np.abs(dm - 0.5 * (d[:-1] + d[1:])) * (b - a)
                turn = np.abs(d[1:] - d[:-1]) * (b - a)
            split = ((bend > 1e-2) | (turn > 0.25)) & (b - a > 1e3 * _EPS * np.maximum(np.abs(a), np.abs(b)))
            split &= np.isfinite(dm)
            if not np.any(split) or x.size > SCAN_MAX:
                break
            new = mid[split]
            new_l = self._logf(new)
            self._require_finite(new, new_l, new_l)
            order = np.argsort(np.concatenate([x, new]), kind="stable")
            x = np.concatenate([x, new])[order]
            kind = np.concatenate([kind, np.zeros(new.size, dtype=kind.dtype)])[order]
            lm = np.concatenate([lm, new_l])[order]
            lp = np.concatenate([lp, new_l])[order]
            d = np.concatenate([d, dm[split]])[order]
        return x, kind, lm, lp, d

    def _kinds(self, x):
        kind = np.zeros(x.size, dtype=np.int8)
        kind[np.isin(x, self._kinks)] = 1
        lo, hi = self.target.support
        kind[(x == lo) | (x == hi)] = 2
        return kind

    def _require_finite(self, x, lm, lp):
        bad = ~(np.isfinite(lm) & np.isfinite(lp))
        if np.any(bad):
            i = int(np.flatnonzero(bad)[0])
            what = ("is 0 (or below the smallest double)" if min(lm[i], lp[i]) == -np.inf
                    else "is not finite")
            raise MethodNotApplicable("method", f"the density {what} at t = {x[i]:.6g}, inside the "
                                                "support; rejection needs f > 0 and bounded between the "
                                                "ends (use 'inversion')")

    def _check_kinks(self):
        """A pole inside the support (a component starting there with shape < 1) has no hat."""
        if not self._kinks.size:
            return
        b = self._kinks
        step = 1e-7 * np.maximum(self._spread, np.abs(b) * 1e-6)
        for side in (-1.0, 1.0):
            at = self._logf(np.nextafter(b, side * np.inf))
            near = self._logf(b + side * step)
            bad = (at - near > math.log(4.0)) | ~np.isfinite(at)
            if np.any(bad):
                where = float(b[np.flatnonzero(bad)[0]])
                raise MethodNotApplicable("method", f"the density is unbounded at t = {where:.6g}, inside "
                                                    "the support; no hat covers a pole there (use 'inversion')")

    def _find_jumps(self, x, lm, lp, d):
        """Jumps of log f between grid points (e.g. a hazard formula with when(...)).

        A cell whose change of log f disagrees with the trapezoid of its end slopes is
        bisected on values alone: the half that departs more from the cell's mean slope
        holds the jump. Only a jump that survives to a bracket of a few ulps is kept.
        """
        dx = np.diff(x)
        dl = lm[1:] - lp[:-1]
        slope = 0.5 * (d[:-1] + d[1:])
        with np.errstate(invalid="ignore"):
            off = np.abs(dl - dx * slope)
        cand = np.flatnonzero(np.isfinite(off) & (off > 1e-3 + 0.05 * np.abs(dl)))
        if not cand.size:
            return np.empty(0)
        a, b = x[cand].copy(), x[cand + 1].copy()
        la, lb, s = lp[cand].copy(), lm[cand + 1].copy(), slope[cand]
        for _ in range(80):
            m = 0.5 * (a + b)
            active = (m > a) & (m < b)
            if not np.any(active):
                break
            lmid = self._logf(m)
            left = np.abs(lmid - la - (m - a) * s) >= np.abs(lb - lmid - (b - m) * s)
            b = np.where(active & left, m, b); lb = np.where(active & left, lmid, lb)
            a = np.where(active & ~left, m, a); la = np.where(active & ~left, lmid, la)
        # A jump keeps its size as the bracket shrinks; smooth change (however steep, as
        # next to a root or pole at an end) is matched by the change over the same width
        # just beside the bracket.
        w = b - a
        beside = np.maximum(np.abs(la - self._logf(a - w)), np.abs(self._logf(b + w) - lb))
        with np.errstate(invalid="ignore"):
            jump = (np.abs(lb - la) > 1e-8) & (np.abs(lb - la) > 100 * beside)
        return np.unique(b[jump])

    def _cell_labels(self, x, lm, lp, d):
        """-1 where log f is concave on a grid cell, +1 where convex, from the change of slope."""
        dd = d[1:] - d[:-1]
        # Changes of slope below the noise of the slopes say nothing: such cells take
        # their neighbours' label (a nearly linear log f is both concave and convex).
        noise = (1e-9 * (np.abs(d[1:]) + np.abs(d[:-1]))
                 + 1e-12 * (2.0 + np.abs(lm[1:]) + np.abs(lp[:-1])) / np.diff(x))
        lab = np.where(np.isfinite(dd) & (np.abs(dd) > noise), np.sign(dd), 0.0)
        idx = np.where(lab != 0, np.arange(lab.size), -1)
        idx = np.maximum.accumulate(idx)
        filled = np.where(idx >= 0, lab[np.maximum(idx, 0)], 0.0)
        first = np.flatnonzero(lab != 0)
        filled = np.where(filled == 0, lab[first[0]] if first.size else -1.0, filled)
        return filled

    def _inflexions(self, x, kind, lab):
        """Inflexion points of log f: where the cell labels change away from a kink, the
        extremum of the slope (golden-section search on d log f in the two cells around)."""
        change = np.flatnonzero(lab[1:] != lab[:-1]) + 1
        change = change[kind[change] != 1]
        if not change.size:
            return np.empty(0)
        a, b = x[change - 1].copy(), x[change + 1].copy()
        sign = lab[change - 1]              # -1: concave before, so the slope has a minimum
        g = 0.5 * (math.sqrt(5.0) - 1.0)
        c1, c2 = b - g * (b - a), a + g * (b - a)
        f1, f2 = sign * -self._slope(c1), sign * -self._slope(c2)
        for _ in range(32):
            # Minimise -sign * d: the minimum of d after a concave piece, the maximum after a convex one.
            left = ~(f1 > f2)
            b = np.where(left, c2, b)
            a = np.where(left, a, c1)
            new_c = np.where(left, b - g * (b - a), a + g * (b - a))
            f_new = sign * -self._slope(new_c)
            c2, f2, c1, f1 = (np.where(left, c1, new_c), np.where(left, f1, f_new),
                              np.where(left, new_c, c2), np.where(left, f_new, f2))
            if np.all(b - a <= 4 * _EPS * np.maximum(np.abs(a), np.abs(b))):
                break
        return 0.5 * (a + b)

    def _find_modes(self, x, d, kind):
        """Modes inside pieces: the slope of log f crosses zero from above."""
        k = np.flatnonzero((d[:-1] > 0) & (d[1:] < 0) & (kind[:-1] != 1) & (kind[1:] != 1))
        if not k.size:
            return np.empty(0)
        # A construction point needs no precision: where the slope, interpolated
        # linearly across the cell, crosses zero.
        return x[k] + (x[k + 1] - x[k]) * d[k] / (d[k] - d[k + 1])

    # ---- construction points -------------------------------------------------------------------
    def _initial_points(self, pieces) -> dict:
        """Piece ends, modes and quantiles spread over the mass: the start of the construction."""
        spread = np.array([self._q[p] for p in self._start_p.tolist()] + [self._isf[1e-6], self._isf[1e-3]])
        inner = np.concatenate([spread, self._modes, pieces[:, 0], pieces[:, 1]])
        inner = inner[np.isfinite(inner) & (inner > self.cL) & (inner < self.cR)]
        # A point within a few ulps of a kink or of another point adds nothing but noise.
        tol = 64 * _EPS * np.maximum(np.abs(inner), self._spread)
        if self._kinks.size:
            gap = np.min(np.abs(inner[:, None] - self._kinks[None, :]), axis=1)
            inner = inner[gap > tol]
        inner = np.unique(inner)
        if inner.size:
            inner = inner[np.concatenate([[True], np.diff(inner) > 64 * _EPS * np.maximum(
                np.abs(inner[1:]), self._spread)])]
        xs = np.unique(np.concatenate([[self.cL, self.cR], inner, self._kinks]))
        pts = self._make_points(xs)
        self._piece_rows = pieces[:, :2]
        self._piece_labels = pieces[:, 2]
        pts["lab"] = self._label_of(0.5 * (xs[:-1] + xs[1:]))
        # A concave interval needs a tangent at one end at least.
        for _ in range(8):
            both = ~np.isfinite(pts["d"][:-1]) & ~np.isfinite(pts["d"][1:]) & (pts["lab"] < 0)
            if not np.any(both):
                break
            self._insert(pts, 0.5 * (pts["x"][:-1][both] + pts["x"][1:][both]))
        return pts

    def _label_of(self, mids):
        k = np.clip(np.searchsorted(self._piece_rows[:, 1], mids), 0, self._piece_labels.size - 1)
        return self._piece_labels[k].astype(float)

    def _make_points(self, xs) -> dict:
        kind = self._kinds(xs)
        lm, lp, d = self._point_values(xs, kind)
        self._require_finite(xs, lm, lp)
        return {"x": xs, "kind": kind, "lm": lm, "lp": lp, "d": d}

    def _insert(self, pts, new_x, relabel=False):
        """Add construction points; each new interval inherits its parent's label, or with
        ``relabel`` takes the label its end slopes show (see ``_relabel``)."""
        new_x = np.unique(new_x[(new_x > pts["x"][0]) & (new_x < pts["x"][-1])])
        new_x = new_x[~np.isin(new_x, pts["x"])]
        if not new_x.size:
            return 0
        old_x = pts["x"]
        new = self._make_points(new_x)
        order = np.argsort(np.concatenate([old_x, new_x]), kind="stable")
        for key in ("x", "kind", "lm", "lp", "d"):
            pts[key] = np.concatenate([pts[key], new[key]])[order]
        mids = 0.5 * (pts["x"][:-1] + pts["x"][1:])
        owner = np.clip(np.searchsorted(old_x, mids) - 1, 0, old_x.size - 2)
        lab = pts["lab"][owner]
        if relabel:
            touched = np.isin(pts["x"][:-1], new_x) | np.isin(pts["x"][1:], new_x)
            lab = np.where(touched, self._relabel(pts, lab), lab)
        pts["lab"] = lab
        return int(new_x.size)

    @staticmethod
    def _relabel(pts, lab):
        """Label intervals by the pattern of their end slopes against the chord (concave:
        d_a >= chord >= d_b; convex: the reverse); keep ``lab`` where neither shows."""
        x, lm, lp, d = pts["x"], pts["lm"], pts["lp"], pts["d"]
        chord = (lm[1:] - lp[:-1]) / np.diff(x)
        da, db = d[:-1], d[1:]
        ok = np.isfinite(da) & np.isfinite(db)
        concave = ok & (da >= chord) & (chord >= db)
        convex = ok & (da <= chord) & (chord <= db)
        return np.where(concave & ~convex, -1.0, np.where(convex & ~concave, 1.0, lab))

    # ---- hat and squeeze ------------------------------------------------------------------------
    @staticmethod
    def _segments(pts) -> dict:
        """Two exponential segments per interval, split where the tangents meet.

        Concave interval [a, b]: hat = tangent at a on [a, z], tangent at b on [z, b];
        squeeze = the chord. Convex: hat = the chord; squeeze = tangent at a, then at b.
        A missing slope (kink, end) leaves the other end's tangent over the whole interval.
        Every line is (point, log value there, slope).
        """
        x, lm, lp, d, lab = pts["x"], pts["lm"], pts["lp"], pts["d"], pts["lab"]
        a, b = x[:-1], x[1:]
        la, lb = lp[:-1], lm[1:]
        da, db = d[:-1], d[1:]
        w = b - a
        chord = (lb - la) / w
        ha, hb = np.isfinite(da), np.isfinite(db)
        with np.errstate(all="ignore"):
            zi = a + (lb - la - db * w) / (da - db)
        z = np.where(ha & hb, zi, np.where(ha, b, a))
        z = np.where(np.isfinite(z), np.clip(z, a, b), 0.5 * (a + b))
        concave = lab < 0
        n = a.size
        seg = {k: np.empty(2 * n) for k in ("x0", "x1", "hx", "hl", "hs", "qx", "ql", "qs")}
        seg["x0"][0::2], seg["x1"][0::2] = a, z
        seg["x0"][1::2], seg["x1"][1::2] = z, b
        # Hat lines.
        seg["hx"][0::2] = a
        seg["hl"][0::2] = la
        seg["hs"][0::2] = np.where(concave, da, chord)
        seg["hx"][1::2] = np.where(concave, b, a)
        seg["hl"][1::2] = np.where(concave, lb, la)
        seg["hs"][1::2] = np.where(concave, db, chord)
        # Squeeze lines (-inf where none).
        seg["qx"][0::2] = a
        seg["ql"][0::2] = np.where(concave | ha, la, -np.inf)
        seg["qs"][0::2] = np.where(concave, chord, np.where(ha, da, 0.0))
        seg["qx"][1::2] = np.where(concave, a, b)
        seg["ql"][1::2] = np.where(concave, la, np.where(hb, lb, -np.inf))
        seg["qs"][1::2] = np.where(concave, chord, np.where(hb, db, 0.0))
        seg["z"] = z
        return seg

    @staticmethod
    def _areas(seg, hat_lift=0.0, sq_drop=0.0):
        """Anchor every segment at its higher end and integrate hat and squeeze in closed form."""
        x0, x1, s = seg["x0"], seg["x1"], seg["hs"]
        width = x1 - x0
        xa = np.where(s <= 0, x0, x1)
        ya = seg["hl"] + s * (xa - seg["hx"]) + hat_lift
        with np.errstate(invalid="ignore"):
            qa = seg["ql"] + seg["qs"] * (xa - seg["qx"]) - sq_drop
            q_other = qa + seg["qs"] * np.where(s <= 0, width, -width)
        hat = _exp_line_area(ya, ya - np.abs(s) * width, width)
        sq = _exp_line_area(qa, q_other, width)
        return xa, ya, qa, hat, np.minimum(sq, hat)

    def _total(self, hat_area):
        return self.FL + float(np.sum(hat_area)) + self.SR

    def _refine(self, pts, start) -> str:
        """Add construction points by DARS until the acceptance goal, the point budget or the
        time budget is reached; returns which one stopped the construction."""
        lo = self.target.support[0]
        for _ in range(10_000):
            seg = self._segments(pts)
            *_, hat, sq = self._areas(seg)
            total = self._total(hat)
            if 1.0 / total >= self.acceptance:
                return "acceptance goal"
            n_pts = pts["x"].size
            if n_pts >= self.max_points:
                return "point budget"
            if time.perf_counter() - start > self.time_budget:
                return "time budget"
            gap = (hat - sq).reshape(-1, 2).sum(axis=1)
            a, b = pts["x"][:-1], pts["x"][1:]
            splittable = (b - a) > 1e3 * _EPS * np.maximum(np.abs(a), np.abs(b))
            gap = np.where(splittable, gap, 0.0)
            if not np.any(gap > 0):
                return "no interval left to split"
            pick = np.flatnonzero(gap >= DARS_FACTOR * gap[gap > 0].mean())
            pick = pick[np.argsort(-gap[pick])][: self.max_points - n_pts]
            a, b, z = a[pick], b[pick], seg["z"][pick]
            w = b - a
            both = np.isfinite(pts["d"][:-1][pick]) & np.isfinite(pts["d"][1:][pick])
            inside = both & (z > a + 0.02 * w) & (z < b - 0.02 * w)
            # Across decades from a finite lower end, the geometric mean keeps splits balanced.
            if np.isfinite(lo):
                wide = (a > lo) & ((b - lo) > 8 * (a - lo))
                mean = np.where(wide, lo + np.sqrt(np.maximum(a - lo, 0) * (b - lo)), 0.5 * (a + b))
            else:
                mean = 0.5 * (a + b)
            if self._insert(pts, np.where(inside, z, mean)) == 0:
                return "no interval left to split"
        return "point budget"

    def _excess(self, pts, seg):
        """Largest log f - log hat and log squeeze - log f on CHECK_POINTS per interval."""
        n = pts["x"].size - 1
        s = np.concatenate([[1e-3], (np.arange(CHECK_POINTS) + 0.5) / CHECK_POINTS, [1 - 1e-3]])
        a, b, z = pts["x"][:-1], pts["x"][1:], seg["z"]
        xc = a[:, None] + (b - a)[:, None] * s[None, :]
        j = np.repeat(np.arange(n), s.size)
        xc = xc.ravel()
        k = 2 * j + (xc > z[j])
        ell = self._logf(xc)
        with np.errstate(invalid="ignore"):
            hat = seg["hl"][k] + seg["hs"][k] * (xc - seg["hx"][k])
            sq = seg["ql"][k] + seg["qs"][k] * (xc - seg["qx"][k])
            over = np.where(np.isfinite(ell), ell - hat, np.inf)
            under = np.where(np.isfinite(sq), sq - ell, -np.inf)
        over_seg = np.full(2 * n, -np.inf); np.maximum.at(over_seg, k, over)
        under_seg = np.full(2 * n, -np.inf); np.maximum.at(under_seg, k, under)
        worst = np.maximum(over, under).reshape(n, s.size)
        where = xc.reshape(n, s.size)[np.arange(n), np.argmax(worst, axis=1)]
        return over_seg, under_seg, np.max(worst, axis=1), where

    @staticmethod
    def _noise(pts, seg):
        """How far log f as computed can stray from a smooth curve, per segment: the models'
        own accuracy (F_NOISE) plus the slope times the spacing of doubles at x, since an
        age is known only to the nearest double (large for a location far from 0)."""
        x, d, lm, lp = pts["x"], pts["d"], pts["lm"], pts["lp"]
        chord = (lm[1:] - lp[:-1]) / np.diff(x)
        steep = np.nanmax(np.abs(np.column_stack([d[:-1], d[1:], chord])), axis=1)
        steep = np.repeat(np.where(np.isfinite(steep), steep, 0.0), 2)
        spacing = np.spacing(np.maximum(np.abs(seg["x0"]), np.abs(seg["x1"])))
        return F_NOISE + 16.0 * steep * spacing

    def _check_and_lift(self, pts) -> None:
        """Confirm hat >= f >= squeeze on a dense grid; split where a boundary was misplaced,
        then lift each hat (lower each squeeze) by twice any excess left plus the noise."""
        self._repairs = 0
        for _ in range(6):
            seg = self._segments(pts)
            over, under, worst, where = self._excess(pts, seg)
            noise = self._noise(pts, seg).reshape(-1, 2).max(axis=1)
            big = worst > BIG_EXCESS + 4.0 * noise
            if not np.any(big) or pts["x"].size >= 4 * self.max_points:
                break
            self._repairs += self._insert(pts, where[big], relabel=True)
        seg = self._segments(pts)
        over, under, worst, where = self._excess(pts, seg)
        xa, ya, qa, hat, sq = self._areas(seg)
        width = seg["x1"] - seg["x0"]
        slack = self._noise(pts, seg) + 16 * _EPS * (1.0 + np.abs(ya) + np.abs(seg["hs"]) * width)
        self._hat_lift = np.maximum(2.0 * over, 0.0) + slack
        self._sq_drop = np.maximum(2.0 * under, 0.0) + slack
        self._max_excess = float(max(np.max(over), np.max(under), 0.0))

    def _finish(self, pts, pieces, reached) -> None:
        seg = self._segments(pts)
        xa, ya, qa, hat, sq = self._areas(seg, self._hat_lift, self._sq_drop)
        keep = (seg["x1"] > seg["x0"]) & (hat > 0)
        s = seg["hs"][keep]
        self.seg_x0 = seg["x0"][keep]
        self.seg_x1 = seg["x1"][keep]
        self.seg_xa = xa[keep]
        self.seg_ya = ya[keep]
        self.seg_slope = s
        self.seg_qa = np.where(np.isfinite(qa[keep]), qa[keep], -np.inf)
        self.seg_qslope = np.where(np.isfinite(qa[keep]), seg["qs"][keep], 0.0)
        self.seg_area = hat[keep]
        self.points_x = pts["x"].copy()
        self.points_logf = np.maximum(pts["lm"], pts["lp"])
        self.interval_labels = pts["lab"].astype(np.int8)
        self.piece_edges = np.concatenate([pieces[:, 0], pieces[-1:, 1]])
        self.piece_convex = pieces[:, 2] > 0
        self._tabulate()
        squeeze_area = float(np.sum(sq[keep]))
        self.extra_stats.update({
            "hat_area": self.total,
            "expected_acceptance": 1.0 / self.total,
            "acceptance_goal": self.acceptance,
            "squeeze_share": (squeeze_area + self.FL + self.SR) / self.total,
            "construction_points": int(self.points_x.size),
            "pieces": int(pieces.shape[0]),
            "concave_pieces": int(np.sum(pieces[:, 2] < 0)),
            "convex_pieces": int(np.sum(pieces[:, 2] > 0)),
            "inversion_mass": self.FL + self.SR,
            "stopped_by": reached,
            "repair_points": self._repairs,
            "check_excess": self._max_excess,
        })

    def _tabulate(self) -> None:
        """The drawing table: one row per piece, [left inversion, hat segments..., right
        inversion], with the cumulative areas that pick a piece and the constants that
        invert its exponential hat."""
        area = np.concatenate([[self.FL], self.seg_area, [self.SR]])
        self.cum = np.cumsum(area)
        self.total = float(self.cum[-1])
        pad = lambda a, fill=0.0: np.concatenate([[fill], a, [fill]])  # noqa: E731
        width = self.seg_x1 - self.seg_x0
        g = -np.abs(self.seg_slope)
        y = g * width
        small = y > -1e-12
        table = np.column_stack([
            self.cum - area,                                        # 0 start of the piece's share
            1.0 / np.where(area > 0, area, 1.0),                    # 1
            pad(width),                                             # 2
            pad(np.where(small, 0.0, np.expm1(y))),                 # 3 expm1(g w)
            pad(np.where(small, 0.0, 1.0 / np.where(small, 1.0, g))),  # 4 1/g
            pad(small.astype(float), 1.0),                          # 5
            pad(self.seg_xa),                                       # 6
            pad(np.where(self.seg_slope <= 0, 1.0, -1.0)),          # 7 direction from the anchor
            pad(self.seg_ya),                                       # 8
            pad(g),                                                 # 9
            pad(self.seg_qa, -np.inf),                              # 10
            pad(self.seg_qslope),                                   # 11
        ])
        # 12: the least squeeze/hat ratio on each segment. log(squeeze/hat) is linear
        # in x there, so the least value sits at an end; v below it is accepted by the
        # squeeze without evaluating exp (a squeeze of the squeeze, exact by linearity).
        D = np.stack([np.zeros_like(width), width])
        xs = self.seg_xa + np.where(self.seg_slope <= 0, 1.0, -1.0) * D
        with np.errstate(invalid="ignore", over="ignore"):
            gap = (self.seg_qa + self.seg_qslope * (xs - self.seg_xa)) - (self.seg_ya + g * D)
            floor_ratio = np.exp(np.minimum(np.min(gap, axis=0), 0.0))
        floor_ratio = np.where(np.isfinite(floor_ratio), floor_ratio, 0.0) * (1.0 - 1e-12)
        table = np.column_stack([table, pad(floor_ratio)])
        self._table = np.ascontiguousarray(table)
        # The last piece with mass (u * total can round up to total), and a guide
        # table over the cumulative areas: guide[j] = first piece whose end exceeds
        # j/G of the total (Chen & Asau 1974). Derived here, not saved.
        self._last = self.cum.size - 1 if self.SR > 0 else self.cum.size - 2
        levels = np.arange(2 * self.cum.size) / (2 * self.cum.size) * self.total
        self._guide = np.searchsorted(self.cum, levels, side="right").astype(np.int64)

    # ---- drawing ----------------------------------------------------------------------------------
    def _propose(self, n, rng):
        """n candidates: (x, v, log hat, log squeeze, exact) where ``exact`` marks draws made
        by inversion beyond the hat; plus the number of uniforms used."""
        u = rng.random(n)
        v = rng.random(n)
        used = 2 * n
        uA = u * self.total
        k = np.minimum(np.searchsorted(self.cum, uA, side="right"), self._last)
        row = self._table[k]
        # The position's uniform is recycled from the one that chose the piece (Hörmann,
        # Leydold & Derflinger 2004, Automatic Nonuniform Random Variate Generation, sec. 2.3).
        w = np.minimum(np.maximum((uA - row[:, 0]) * row[:, 1], 0.0), 1.0)
        width = row[:, 2]
        with np.errstate(all="ignore"):
            # Inverse cdf of exp(g * D) on [0, width], D measured from the hat's higher end.
            D = np.where(row[:, 5] > 0, w * width, np.log1p(w * row[:, 3]) * row[:, 4])
        D = np.minimum(np.maximum(D, 0.0), width)
        x = row[:, 6] + row[:, 7] * D
        loghat = row[:, 8] + row[:, 9] * D
        logsq = row[:, 10] + row[:, 11] * (x - row[:, 6])
        exact = (k == 0) | (k == self.cum.size - 1)
        if np.any(exact):
            for side, mask in ((0, k == 0), (1, k == self.cum.size - 1)):
                if np.any(mask):
                    x[mask], extra = self._end_draws(side, int(mask.sum()), rng)
                    used += extra
        return x, v, loghat, logsq, exact, used

    def _end_draws(self, side, count, rng):
        """``count`` exact draws beyond the hat (side 0: below cL by quantile, 1: above cR by
        isf), and the uniforms spent. A model without a closed-form inverse pays a root
        search per call, so during one ``sample`` call draws for the whole call are made
        at once and kept in a reserve (iid, so using them later changes no law)."""
        mass = self.FL if side == 0 else self.SR
        invert = self.target.quantile if side == 0 else self.target.isf
        reserve = getattr(self, "_reserve", None)
        if reserve is None:
            return invert(rng.random(count) * mass), count
        spent = 0
        if reserve[side].size < count:
            expected = self._remaining * mass / self.total
            batch = count + int(1.2 * expected + 4.0 * math.sqrt(expected)) + 8
            reserve[side] = np.concatenate([reserve[side], invert(rng.random(batch) * mass)])
            spent = batch
        out, reserve[side] = reserve[side][:count], reserve[side][count:]
        return out, spent

    def sample(self, n=None, rng=None, out: np.ndarray | None = None) -> np.ndarray:
        self._reserve = [np.empty(0), np.empty(0)]
        self._remaining = check_output_buffer(out, n).size if out is not None else sample_size("n", n)
        try:
            return super().sample(n, rng, out=out)
        finally:
            self._reserve = None

    def _decide(self, x, v, loghat, logsq, exact):
        """Accepted mask, squeeze-accepted mask and density-evaluated mask."""
        with np.errstate(invalid="ignore", over="ignore"):
            squeezed = ~exact & (v <= np.exp(np.minimum(logsq - loghat, 0.0)))
        test = ~exact & ~squeezed
        accepted = exact | squeezed
        if np.any(test):
            f = self.target.pdf(x[test])
            accepted[test] = v[test] * np.exp(loghat[test]) <= f
        return accepted, squeezed, test

    def _compiled_round(self, n, rng, out, got):
        """One round of n candidates through the compiled pass (engine.kernels): the
        verdicts are the numpy pass's, written straight into ``out``; returns the count."""
        u, v, x, loghat, status = self._scratch(n)
        rng.random(out=u)
        rng.random(out=v)
        used = 2 * n
        counts = kernels.hat_propose(u, v, self.cum, self._guide, self.total, self._last, self._table,
                                     x, loghat, status)
        for side, code in ((0, 2), (1, 3)):
            if counts[code]:
                mask = status == code
                x[mask], extra = self._end_draws(side, int(counts[code]), rng)
                used += extra
        tested = int(counts[1])
        passed = 0
        if tested:
            idx = np.flatnonzero(status == 1)
            ok = v[idx] * np.exp(loghat[idx]) <= self.target.pdf(x[idx])
            status[idx[ok]] = 4                      # accepted after the density test
            passed = int(ok.sum())
        c = self.counts
        c["uniforms"] += used
        c["candidates"] += n
        c["accepted"] += n - tested + passed
        c["squeezed"] += int(counts[0])
        c["density_evals"] += tested
        return kernels.take_accepted(x, status, out, got)

    def _scratch(self, n):
        """Work arrays reused across rounds (fresh large arrays cost page faults on
        every round); one set per thread, so a sampler shared by threads stays safe."""
        local = self.__dict__.setdefault("_local", threading.local())
        buf = getattr(local, "buf", None)
        if buf is None or buf[0].size < n:
            size = max(n, 1 << 16)
            local.buf = buf = (np.empty(size), np.empty(size), np.empty(size), np.empty(size),
                               np.empty(size, dtype=np.int8))
        return tuple(b[:n] for b in buf)

    def _fill(self, out, rng):
        m = out.size
        got = 0
        while got < m:
            need = m - got
            n = int(need * self.total * 1.02) + 16
            if kernels.HAVE_JIT:
                got += self._compiled_round(n, rng, out, got)
                continue
            x, v, loghat, logsq, exact, used = self._propose(n, rng)
            accepted, squeezed, tested = self._decide(x, v, loghat, logsq, exact)
            c = self.counts
            c["uniforms"] += used
            c["candidates"] += n
            c["accepted"] += int(accepted.sum())
            c["squeezed"] += int(squeezed.sum())
            c["density_evals"] += int(tested.sum())
            keep = x[accepted][:need]
            out[got:got + keep.size] = keep
            got += keep.size
        if getattr(self, "_reserve", None) is not None:
            self._remaining -= m

    # ---- the hat as a function, pictures, persistence ----------------------------------------------
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

    def geometry(self, n_points: int = 400, rng=0) -> dict[str, Any]:
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

    _TABLES = ("seg_x0", "seg_x1", "seg_xa", "seg_ya", "seg_slope", "seg_qa", "seg_qslope", "seg_area",
               "points_x", "points_logf", "interval_labels", "piece_edges", "piece_convex")

    def _tables(self):
        return {k: getattr(self, k) for k in self._TABLES}

    def _meta(self):
        return {"acceptance": self.acceptance, "max_points": self.max_points, "time_budget": self.time_budget,
                "cL": self.cL, "cR": self.cR, "FL": self.FL, "SR": self.SR, "stats": dict(self.extra_stats)}

    def _restore(self, meta, tables):
        # Every table is checked before the drawing table is derived from it: a negative
        # or NaN area, or segments out of order, would make draws loop or go wrong.
        check = table_checks.table
        self.seg_x0 = check(tables, "seg_x0", nondecreasing=True)
        n = self.seg_x0.size
        self.seg_x1 = check(tables, "seg_x1", length=n)
        if np.any(self.seg_x1 < self.seg_x0):
            raise ModelError("path", "the sampler file's segments end before they start; the file is damaged")
        self.seg_xa = check(tables, "seg_xa", length=n)
        self.seg_ya = check(tables, "seg_ya", length=n)
        self.seg_slope = check(tables, "seg_slope", length=n)
        self.seg_qa = check(tables, "seg_qa", length=n, finite=False, high=np.inf)
        self.seg_qslope = check(tables, "seg_qslope", length=n)
        self.seg_area = check(tables, "seg_area", length=n, low=0.0)
        self.points_x = check(tables, "points_x", nondecreasing=True)
        self.points_logf = check(tables, "points_logf", length=self.points_x.size, finite=False)
        self.interval_labels = check(tables, "interval_labels", kind="int", low=-1, high=1,
                                     allow_empty=True).astype(np.int8)
        self.piece_edges = check(tables, "piece_edges", nondecreasing=True)
        self.piece_convex = check(tables, "piece_convex", kind="bool", allow_empty=True)
        number = table_checks.number
        self.acceptance = number(meta, "acceptance", low=0.0, high=1.0)
        self.max_points = number(meta, "max_points", low=0.0)
        self.time_budget = number(meta, "time_budget", low=0.0)
        self.cL, self.cR = number(meta, "cL"), number(meta, "cR")
        self.FL, self.SR = number(meta, "FL", low=0.0, high=1.0), number(meta, "SR", low=0.0, high=1.0)
        if np.any(np.isinf(self.seg_qa) & (self.seg_qa > 0)):
            raise ModelError("path", "the sampler file's 'seg_qa' table holds +inf; the file is damaged")
        self._tabulate()
        # The hat's area is at least the density's (1); a smaller or non-finite one is not a hat.
        if not (1.0 - 1e-6 <= self.total < 1e6):
            raise ModelError("path", f"the sampler file's hat has area {self.total:g}, which cannot cover a "
                                     "density of area 1; the file is damaged")
        self.extra_stats.update(table_checks.mapping(meta, "stats"))
