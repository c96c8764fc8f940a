"""Hat and squeeze of log f by transformed density rejection (T = log): tangents and chords
on the concave and convex pieces, construction points added by DARS, a dense check, a lift.

Gilks & Wild (1992, Appl. Statist. 41(2) 337-348); Hörmann (1995, ACM TOMS 21(2) 182-193);
convex pieces: Evans & Swartz (1998, JCGS 7(4)); points: Leydold, Janka & Hörmann (2002, DARS).
"""
from __future__ import annotations

import time

import numpy as np

from .rejection_scan import EPS

DARS_FACTOR = 0.99        # split intervals whose hat - squeeze area exceeds this times the mean
CHECK_POINTS = 16         # per interval, for the hat >= f >= squeeze check
BIG_EXCESS = 1e-6         # a log-excess this large means a misplaced boundary: split there
# Relative accuracy to which models evaluate f (a numerical cumulative hazard or
# normalising area is good to ~1e-13): every hat is lifted, every squeeze lowered, by this.
F_NOISE = 1e-11


def psi(y):
    """(1 - exp(-y)) / y for y >= 0, with its limit 1 at y = 0."""
    y = np.asarray(y, dtype=float)
    safe = np.where(y > 1e-12, y, 1.0)
    return np.where(y > 1e-12, -np.expm1(-safe) / safe, 1.0 - 0.5 * y)


def exp_line_area(l0, l1, width):
    """Integral over [x0, x0 + width] of exp(line) with end values l0, l1 (logs); 0 if either is -inf."""
    top = np.maximum(l0, l1)
    with np.errstate(invalid="ignore", over="ignore"):
        drop = np.abs(l1 - l0)
        out = np.exp(top) * width * psi(np.where(np.isfinite(drop), drop, 0.0))
    return np.where(np.isfinite(l0) & np.isfinite(l1), out, 0.0)


class HatConstruction:
    """The set-up's second half, mixed into ``Rejection``: construction points, the two
    exponential segments per interval, DARS refinement, the check and the lift, the tables."""

    # ---- construction points -------------------------------------------------------------------
    def _initial_points(self, pieces) -> dict:
        """Piece ends, modes and quantiles spread over the mass: the start of the construction."""
        spread = np.array([self._q[p] for p in self._start_p.tolist()] + [self._isf[1e-6], self._isf[1e-3]])
        inner = np.concatenate([spread, self._modes, pieces[:, 0], pieces[:, 1]])
        inner = inner[np.isfinite(inner) & (inner > self.cL) & (inner < self.cR)]
        # A point within a few ulps of a kink or of another point adds nothing but noise.
        tol = 64 * EPS * np.maximum(np.abs(inner), self._spread)
        if self._kinks.size:
            gap = np.min(np.abs(inner[:, None] - self._kinks[None, :]), axis=1)
            inner = inner[gap > tol]
        inner = np.unique(inner)
        if inner.size:
            inner = inner[np.concatenate([[True], np.diff(inner) > 64 * EPS * np.maximum(
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
        hat = exp_line_area(ya, ya - np.abs(s) * width, width)
        sq = exp_line_area(qa, q_other, width)
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
            splittable = (b - a) > 1e3 * EPS * np.maximum(np.abs(a), np.abs(b))
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
        slack = self._noise(pts, seg) + 16 * EPS * (1.0 + np.abs(ya) + np.abs(seg["hs"]) * width)
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
            "flat_step_share": self.flat_share,
            "construction_points": int(self.points_x.size),
            "pieces": int(pieces.shape[0]),
            "concave_pieces": int(np.sum(pieces[:, 2] < 0)),
            "convex_pieces": int(np.sum(pieces[:, 2] > 0)),
            "inversion_mass": self.FL + self.SR,
            "stopped_by": reached,
            "repair_points": self._repairs,
            "check_excess": self._max_excess,
        })

