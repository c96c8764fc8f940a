"""Where log f is concave and where convex: a dense scan of the density that finds jumps,
kinks, inflexion points and modes, and places the ends of the hat (inversion beyond them).

Follows the piecewise set-up of Evans & Swartz (1998, J. Comput. Graph. Statist. 7(4) 514-528):
log f split at its inflexion points into concave and convex pieces; the cut tails are drawn
exactly by inversion (composition), so the hat never relies on log f where it was not examined.
"""
from __future__ import annotations

import math

import numpy as np

from ..errors import MethodNotApplicable
from ..target import Target

POLE_MASS = 1e-3          # mass next to a pole at the lower end that inversion draws
SCAN_QUANTILES = 385      # bulk of the scan grid (equal steps in probability)
SCAN_TAIL = 48            # per tail (geometric steps in probability)
SCAN_SPREAD = 400         # equal (or geometric) steps in t, for regions of little mass
SCAN_MAX = 20_000         # the scan stops refining beyond this many points
EPS = np.finfo(float).eps


def model_parts(target: Target):
    """The target and every model it is built from (mixture/competing components, residual base)."""
    yield target
    for c in getattr(target, "components", ()) or ():
        yield from model_parts(c)
    base = getattr(target, "base", None)
    if isinstance(base, Target):
        yield from model_parts(base)


def declared_kinks(target: Target) -> np.ndarray:
    """Ages where the model says f may jump or kink (component support ends, bin edges)."""
    if hasattr(target, "breakpoints"):
        pts = list(target.breakpoints())
    elif isinstance(getattr(target, "base", None), Target) and hasattr(target, "age"):
        # A residual life X = T - age inherits the base model's breakpoints, shifted.
        pts = [b - target.age for b in declared_kinks(target.base)]
    else:
        pts = []
    lo, hi = target.support
    return np.unique(np.array([p for p in pts if lo < p < hi], dtype=float))


class LogDensityScan:
    """The set-up's first half, mixed into ``Rejection``: log f, its slope, the cut ends and
    the concave/convex pieces. Expects ``target`` and ``tolerance`` on the instance."""

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
            split = ((bend > 1e-2) | (turn > 0.25)) & (b - a > 1e3 * EPS * np.maximum(np.abs(a), np.abs(b)))
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
            if np.all(b - a <= 4 * EPS * np.maximum(np.abs(a), np.abs(b))):
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

