"""Ratio-of-uniforms for bounded densities with tails no heavier than 1/t^2: an automatic
minimal bounding rectangle, plus polygon squeeze and tangent envelope where A is convex.

Kinderman & Monahan (1977), "Computer generation of random variables using the ratio
of uniform deviates", ACM TOMS 3(3) 257-260: if (U, V) is uniform on
A = {(u, v): 0 < u <= sqrt f(v/u + m)}, then X = V/U + m has density f, and area(A) = 1/2.
Leydold (2000), "Automatic sampling with the ratio-of-uniforms method", ACM TOMS 26(1)
78-98: A is convex exactly when f is T_{-1/2}-concave (1/sqrt f convex); then the polygon
through boundary points of A lies inside A (a squeeze) and the tangents at those points
cut out a polygon that contains A (an envelope closer than the rectangle).
"""
from __future__ import annotations

import math
from typing import Any

import numpy as np
from scipy import optimize

from .. import kernels, table_checks
from ..errors import MethodNotApplicable, ModelError
from ..target import Target
from .base import Sampler
from .table import alias_table
from .leva import LevaNormal, leva_applies

#: Relative margin added to every computed bound, so rounding in the optimiser
#: can only make the envelope (never the region) larger.
SAFETY = 1e-9
#: Offset of the envelope's tangent lines (and the squeeze's chords), relative
#: to the rectangle's diagonal: covers rounding in the numerical tangents.
LINE_MARGIN = 1e-9
#: Leydold (2000) brings area(envelope)/area(squeeze) close to 1 with a few dozen
#: construction points; we stop once the sectors' slack is 1% of area(A) = 1/2.
TARGET_SLACK = 0.01
MAX_CONSTRUCTION_POINTS = 160
#: 1/sqrt f counts as convex when its slopes never fall by more than this share
#: of their size (room for rounding in f, far above it for a real dent).
CONVEXITY_RTOL = 1e-6
#: Relative rounding error assumed for f (numerically integrated models reach ~1e-13).
F_NOISE = 1e-12
ENVELOPES = ("auto", "polygon", "rectangle")


# ---- what the method can serve ---------------------------------------------------------
def _pole_ages(target: Target) -> list[float]:
    """Ages at which the density is unbounded, from the models' own flags (recursively)."""
    lo, hi = target.support
    ages = [lo] if target.pole_at_lower else []
    for c in getattr(target, "components", ()):
        ages.extend(_pole_ages(c))
    base, age = getattr(target, "base", None), getattr(target, "age", None)
    if base is not None and age is not None:
        ages.extend(p - age for p in _pole_ages(base) if p >= age)
    return [a for a in ages if lo <= a <= hi]


def _end_pole(target: Target) -> str | None:
    """A density that keeps growing towards a finite end of the support has no sup there."""
    lo, hi = target.support
    # The spread of the bulk, not the support's width: a hazard model's support may
    # end 1e100 past its bulk (where R underflows), where steps of width*1e-6 see nothing.
    width = min(hi - lo, float(target.quantile(0.75) - target.quantile(0.25)))
    steps = width * np.array([1e-6, 1e-9, 1e-12])
    for name, end, sign in (("lower", lo, 1.0), ("upper", hi, -1.0)):
        if not np.isfinite(end):
            continue
        with np.errstate(all="ignore"):
            f = np.asarray(target.pdf(end + sign * steps), dtype=float)
        if np.all(np.isfinite(f)) and f[2] > f[1] > f[0] and f[2] > 2.0 * f[0]:
            return f"the density grows without bound towards the {name} end of the support ({end:g})"
    return None


def _heavy_tail(target: Target) -> str | None:
    """Is sup |t - c|·sqrt f(t) infinite? (a tail heavier than 1/t^2: Kinderman & Monahan's
    region A is then unbounded in v).

    Read off on ages a decade apart out to 1e30 spreads from the median, not at tail
    quantiles: those are only as good as the model's inversion far out, and a tail this
    heavy keeps f far above underflow over that whole range.
    """
    lo, hi = target.support
    centre = float(target.quantile(0.5))
    spread = float(target.quantile(0.75) - target.quantile(0.25))
    offsets = spread * 10.0 ** np.arange(0, 31)
    for name, end, sign in (("upper", hi, 1.0), ("lower", lo, -1.0)):
        if np.isfinite(end):
            continue
        with np.errstate(all="ignore"):
            f = np.asarray(target.pdf(centre + sign * offsets), dtype=float)
        alive = np.flatnonzero(np.isfinite(f) & (f > 0))
        if alive.size < 4:
            continue
        g = offsets[alive[-4:]] * np.sqrt(f[alive[-4:]])
        if np.all(g[1:] > g[:-1] * (1 + 1e-3)):
            return (f"the {name} tail is heavier than 1/t^2 (|t|·sqrt f(t) still grows at "
                    f"|t| = {offsets[alive[-1]]:.3g}), so the region A is unbounded and no rectangle "
                    "encloses it")
    return None


# ---- small geometry helpers -------------------------------------------------------------
def _clip(poly: np.ndarray, normal: np.ndarray, c: float) -> np.ndarray:
    """Convex polygon (vertices in order) cut to the half-plane normal·p <= c (Sutherland-Hodgman)."""
    out = []
    n = len(poly)
    for i in range(n):
        a, b = poly[i], poly[(i + 1) % n]
        da, db = float(normal @ a) - c, float(normal @ b) - c
        if da <= 0:
            out.append(a)
        if (da <= 0) != (db <= 0):
            out.append(a + (da / (da - db)) * (b - a))
    return np.array(out) if out else np.empty((0, 2))


def _cross(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return a[..., 0] * b[..., 1] - a[..., 1] * b[..., 0]


def _fan(vertices: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Triangles (V0, Vi, Vi+1) of a convex polygon: apexes, two edge vectors, areas."""
    m = len(vertices) - 2
    apex = np.repeat(vertices[:1], max(m, 0), axis=0)
    e1 = vertices[1:-1] - apex
    e2 = vertices[2:] - apex
    return apex, e1, e2, 0.5 * np.abs(_cross(e1, e2))


def _sector_triangles(poly: np.ndarray, pts: np.ndarray):
    """The envelope polygon cut along the rays from the origin through the construction
    points, as triangles tagged with their sector (-1: a tail wedge, outside the squeeze).

    Knowing the sector of each candidate makes the squeeze test a single line test,
    with no search for the sector that v/u falls in.
    """
    def after(p):    # x >= x(p): cross(p, q) >= 0
        return np.array([p[1], -p[0]])

    def before(p):   # x <= x(p)
        return np.array([-p[1], p[0]])

    pieces = [(_clip(poly, before(pts[0]), 0.0), -1)]
    for i in range(len(pts) - 1):
        pieces.append((_clip(_clip(poly, after(pts[i]), 0.0), before(pts[i + 1]), 0.0), i))
    pieces.append((_clip(poly, after(pts[-1]), 0.0), -1))
    parts = [(_fan(piece), sector) for piece, sector in pieces if len(piece) >= 3]
    apex = np.concatenate([f[0] for f, _ in parts])
    e1 = np.concatenate([f[1] for f, _ in parts])
    e2 = np.concatenate([f[2] for f, _ in parts])
    area = np.concatenate([f[3] for f, _ in parts])
    sector = np.concatenate([np.full(f[3].size, s, dtype=np.int64) for f, s in parts])
    return apex, e1, e2, area, sector


class RatioOfUniforms(Sampler):
    """X = V/U + m for (U, V) uniform on A, by rejection from a rectangle or a tangent polygon.

    Needs a bounded density (no pole), tails no heavier than 1/t^2, and no atoms.
    ``envelope``: "rectangle" (Kinderman & Monahan's minimal rectangle),
    "polygon" (Leydold's tangent polygon, for T_{-1/2}-concave densities) or
    "auto" (the polygon when the density allows it and it is smaller).
    Normal and lognormal families go to Leva's generator (which has its own fixed
    envelope, so ``envelope`` is ignored there) unless ``leva=False``.
    """

    method = "ratio-of-uniforms"
    reference = ("Kinderman & Monahan (1977), ACM TOMS 3(3):257-260; squeeze and tangent envelope: "
                 "Leydold (2000), ACM TOMS 26(1):78-98")

    def __init__(self, target: Target, tolerance: float = 1e-10, envelope: str = "auto"):
        super().__init__(target, tolerance)
        envelope = str(envelope).strip().lower()
        if envelope not in ENVELOPES:
            raise ModelError("envelope", f"must be one of {', '.join(ENVELOPES)}, got {envelope!r}")
        self.envelope_request = envelope

    @classmethod
    def build(cls, target: Target, tolerance: float = 1e-10, leva: bool = True, **options) -> Sampler:
        if cls is RatioOfUniforms and leva and leva_applies(target):
            # Leva's fixed rectangle and quadratic squeezes replace the automatic ones.
            return LevaNormal.build(target, tolerance)
        return super().build(target, tolerance, **options)

    @classmethod
    def check_applicable(cls, target: Target) -> None:
        if target.atoms.size:
            raise MethodNotApplicable("method", "the model has atoms (probability mass at single ages, as a "
                                                "product-limit estimate has); ratio-of-uniforms needs a "
                                                "density: use inversion")
        if target.kind == "histogram" and not getattr(target, "smooth", True):
            # Mathematically fine, but the piecewise-linear CDF inverts exactly in one
            # table look-up, while A's jumps would leave the rectangle loose and unsqueezed.
            raise MethodNotApplicable("method", "a piecewise-constant histogram is drawn exactly by table "
                                                "look-up (inversion of its piecewise-linear CDF, one uniform "
                                                "per draw); ratio-of-uniforms would only add rejections")
        poles = _pole_ages(target)
        if poles:
            raise MethodNotApplicable("method", f"the density is unbounded at t = {poles[0]:g}, so the region "
                                                "A is unbounded in u and no rectangle encloses it")
        for problem in (_end_pole(target), _heavy_tail(target)):
            if problem:
                raise MethodNotApplicable("method", problem)

    # ---- set-up ------------------------------------------------------------------------
    def _probe(self, m: float, n_bulk: int = 4000) -> np.ndarray:
        """Ages spread by the target's quantiles (log-spaced into both tails), plus the mode."""
        t = self.target
        lo, hi = t.support
        tails = np.logspace(-14, -3, 45)
        p = np.concatenate([tails, np.linspace(1e-3, 1 - 1e-3, n_bulk)])
        x = np.concatenate([t.quantile(p), t.isf(tails), [m]])
        x = np.unique(x[np.isfinite(x) & (x > lo) & (x < hi)])
        # Quantiles and inverse survival values meet near p = 1e-3 with rounding-level
        # gaps; such near-twins would turn rounding in f into false curvature.
        spread = float(t.quantile(0.75) - t.quantile(0.25))
        keep = np.concatenate([[True], np.diff(x) > 1e-9 * spread])
        return x[keep]

    def _extend(self, x: np.ndarray, m: float) -> np.ndarray:
        """Ages beyond the probe grid, stepping geometrically towards each end of the support,
        so the checks also see the far tails that quantiles in double precision cannot reach."""
        lo, hi = self.target.support
        k = 2.0 ** np.arange(1, 61)
        out = []
        for edge, end in ((x[-1], hi), (x[0], lo)):
            if np.isfinite(end):
                out.append(end - (end - edge) / k)
            else:
                out.append(m + (edge - m) * (1.0 + k))
        pts = np.concatenate(out)
        return pts[np.isfinite(pts) & (pts > lo) & (pts < hi)]

    def _dpdf(self, x: np.ndarray) -> np.ndarray:
        """f'(x) by a fourth-order difference (one-sided next to an end of the support)."""
        t = self.target
        lo, hi = t.support
        # f changes on the scale of the spread in the bulk and of the age itself in a
        # power-law tail; a step of 1e-5 of that balances truncation against rounding.
        median = float(t.quantile(0.5))
        h = 1e-5 * np.maximum(float(t.quantile(0.75) - t.quantile(0.25)), np.abs(x - median))
        f = t.pdf
        central = (-f(x + 2 * h) + 8 * f(x + h) - 8 * f(x - h) + f(x - 2 * h)) / (12 * h)
        # Within 2h of an end, the one-sided fourth-order stencil keeps the step (and the
        # accuracy) instead of shrinking it to the room left (Fornberg 1988, Math. Comp. 51).
        side = np.where(x - lo < hi - x, 1.0, -1.0)
        one_sided = side * (-25 * f(x) + 48 * f(x + side * h) - 36 * f(x + 2 * side * h)
                            + 16 * f(x + 3 * side * h) - 3 * f(x + 4 * side * h)) / (12 * h)
        near_end = (x - 2 * h <= lo) | (x + 2 * h >= hi)
        return np.where(near_end, one_sided, central)

    def _sup(self, fun, x: np.ndarray, values: np.ndarray) -> float:
        """sup of fun near the grid's largest local maxima: a bounded Brent search between
        each maximum's neighbours (so a second mode elsewhere is not missed)."""
        if values.size == 0:
            return 0.0
        best = float(np.max(values))
        if best <= 0:
            return best
        padded = np.concatenate([[-np.inf], values, [-np.inf]])
        local = np.flatnonzero((padded[1:-1] >= padded[:-2]) & (padded[1:-1] >= padded[2:]))
        local = local[values[local] >= 0.9 * best]
        local = local[np.argsort(values[local])[::-1][:6]]
        for i in local:
            a, b = x[max(i - 1, 0)], x[min(i + 1, x.size - 1)]
            if not b > a:
                continue
            # Search in the offset from a: the bounded method's own relative tolerance
            # (sqrt(eps)·|x|) would otherwise swamp a bracket far from 0 (a large location).
            res = optimize.minimize_scalar(lambda d: -float(fun(a + d)), bounds=(0.0, b - a), method="bounded",
                                           options=dict(xatol=1e-10 * (b - a)))
            if np.isfinite(res.fun):
                best = max(best, -float(res.fun))
        return best

    def _rectangle(self, m: float, x: np.ndarray) -> tuple[float, float, float]:
        """u+ = sup sqrt f, v- = inf (t - m) sqrt f, v+ = sup (t - m) sqrt f (Kinderman & Monahan 1977)."""
        t = self.target
        f = t.pdf(x)
        g = (x - m) * np.sqrt(f)
        f_max = self._sup(t.pdf, x, f)
        right, left = x > m, x < m
        g_max = self._sup(lambda s: (s - m) * math.sqrt(t.pdf(s)), x[right], g[right]) if right.any() else 0.0
        g_min = -self._sup(lambda s: (m - s) * math.sqrt(t.pdf(s)), x[left], -g[left]) if left.any() else 0.0
        return (math.sqrt(f_max) * (1 + SAFETY), min(g_min, 0.0) * (1 + SAFETY), max(g_max, 0.0) * (1 + SAFETY))

    def _setup(self) -> None:
        t = self.target
        m = float(t.mode())
        lo, hi = t.support
        if not (np.isfinite(m) and lo <= m <= hi):
            raise MethodNotApplicable("method", f"the mode could not be located (got {m!r})")
        # A numerical mode next to a finite end, where f is no lower, is that end: the
        # optimiser stops within sqrt(eps) of a flat maximum.
        spread = float(t.quantile(0.75) - t.quantile(0.25))
        for end, inward in ((lo, 1.0), (hi, -1.0)):
            if np.isfinite(end) and abs(m - end) <= 1e-6 * spread:
                if t.pdf(end + inward * 1e-12 * spread) >= t.pdf(m) * (1 - 1e-12):
                    m = end
        x = self._probe(m)
        x = np.unique(np.concatenate([x, self._extend(x, m)]))
        u_plus, v_minus, v_plus = self._rectangle(m, x)
        if not (np.isfinite(u_plus) and u_plus > 0 and np.isfinite(v_minus) and np.isfinite(v_plus)):
            raise MethodNotApplicable("method", "the bounding rectangle is not finite "
                                                f"(u+ = {u_plus:g}, v- = {v_minus:g}, v+ = {v_plus:g})")
        # Check the rectangle between and beyond the probe ages; a miss means the
        # optimiser was fooled (a spike, a second mode), so enlarge to what was seen.
        check_x = np.concatenate([x, 0.5 * (x[1:] + x[:-1])])
        fc = t.pdf(check_x)
        uc, vc = np.sqrt(fc), (check_x - m) * np.sqrt(fc)
        checked = "grid check passed"
        if uc.max() > u_plus or vc.max() > v_plus or vc.min() < v_minus:
            u_plus = max(u_plus, float(uc.max()) * (1 + 1e-6))
            v_plus = max(v_plus, float(vc.max()) * (1 + 1e-6))
            v_minus = min(v_minus, float(vc.min()) * (1 + 1e-6))
            checked = "enlarged to the values found by the grid check"
        state = {"centre": m, "u_plus": u_plus, "v_minus": v_minus, "v_plus": v_plus,
                 "envelope": "rectangle", "squeeze": "", "rectangle_check": checked}
        tables = {"construction_x": np.empty(0), "points": np.empty((0, 2)),
                  "chords": np.empty((0, 3)), "polygon": np.empty((0, 2))}
        concave, where = self._t_concave(x)
        if not concave:
            state["squeeze"] = "none: density not T_{-1/2}-concave"
            state["t_concavity"] = f"1/sqrt f is not convex near t = {where:.6g}"
        else:
            self._squeezes(state, tables, check_x)
        if self.envelope_request == "polygon" and state["envelope"] != "polygon":
            raise MethodNotApplicable("envelope", "the tangent polygon needs a convex region A (a "
                                                  "T_{-1/2}-concave density); "
                                                  f"{state.get('t_concavity', state['squeeze'])}")
        self._install(state, tables)

    def _t_concave(self, x: np.ndarray) -> tuple[bool, float]:
        """Is 1/sqrt f convex on the probe ages (T_c-concavity with c = -1/2, Leydold 2000)?"""
        f = self.target.pdf(x)
        keep = f > 1e-280
        xs, h = x[keep], 1.0 / np.sqrt(f[keep])
        if xs.size < 3:
            return False, float("nan")
        dx = np.diff(xs)
        slope = np.diff(h) / dx
        drop = np.diff(slope)
        # Rounding in f (relative F_NOISE) moves each slope by about F_NOISE·h/dx.
        noise = F_NOISE * ((h[:-2] + h[1:-1]) / dx[:-1] + (h[1:-1] + h[2:]) / dx[1:])
        bad = drop < -(CONVEXITY_RTOL * (np.abs(slope[1:]) + np.abs(slope[:-1])) + noise)
        if bad.any():
            return False, float(xs[1:-1][bad][0])
        return True, float("nan")

    def _boundary(self, x: np.ndarray, m: float) -> np.ndarray:
        """Points (sqrt f(x), (x - m) sqrt f(x)) of A's curved boundary."""
        r = np.sqrt(self.target.pdf(x))
        return np.stack([r, (x - m) * r], axis=-1)

    def _tangents(self, x: np.ndarray, m: float, pts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Unit normals n and offsets c of the tangent lines n·p = c at boundary points,
        oriented so A (and the origin) lie on the side n·p <= c."""
        f = self.target.pdf(x)
        du = self._dpdf(x) / (2.0 * np.sqrt(f))
        dv = du * (x - m) + np.sqrt(f)
        n = np.stack([dv, -du], axis=-1)
        n /= np.hypot(n[:, 0], n[:, 1])[:, None]
        c = np.einsum("ij,ij->i", n, pts)
        flip = c < 0
        n[flip] *= -1.0
        return n, np.abs(c)

    def _chords(self, pts: np.ndarray) -> np.ndarray:
        """Lines a·u + b·v = c through consecutive boundary points, origin side <= c."""
        d = pts[1:] - pts[:-1]
        n = np.stack([d[:, 1], -d[:, 0]], axis=-1)
        n /= np.hypot(n[:, 0], n[:, 1])[:, None]
        c = np.einsum("ij,ij->i", n, pts[:-1])
        flip = c < 0
        n[flip] *= -1.0
        return np.column_stack([n, np.abs(c)])

    def _sector_slack(self, pts, normals, offsets) -> np.ndarray:
        """Area of the triangle between each sector's chord and the two tangents at its ends."""
        n1, n2 = normals[:-1], normals[1:]
        det = _cross(n1, n2)
        c1, c2 = offsets[:-1], offsets[1:]
        with np.errstate(divide="ignore", invalid="ignore"):
            tu = (c1 * n2[:, 1] - c2 * n1[:, 1]) / det
            tv = (n1[:, 0] * c2 - n2[:, 0] * c1) / det
        apex = np.stack([tu, tv], axis=-1)
        area = 0.5 * np.abs(_cross(pts[1:] - pts[:-1], apex - pts[:-1]))
        parallel = np.abs(det) < 1e-12
        # Parallel tangents at two points of a convex curve: the curve is the segment between them.
        return np.where(parallel, 0.0, np.where(np.isfinite(area), area, np.inf))

    def _squeezes(self, state: dict, tables: dict, check_x: np.ndarray) -> None:
        """Construction points, the inner polygon and the tangent envelope, verified on ages."""
        t = self.target
        m = state["centre"]
        lo, hi = t.support
        p = np.concatenate([[1e-8, 1e-6, 1e-4, 1e-3, 0.01], np.linspace(0.03, 0.97, 19),
                            [0.99, 0.999, 1 - 1e-4]])
        xc = np.concatenate([t.quantile(p), t.isf(np.array([1e-6, 1e-8])), [m]])
        xc = np.unique(xc[np.isfinite(xc) & (xc > lo) & (xc < hi)])
        xc = xc[t.pdf(xc) > 1e-280]
        while True:
            pts = self._boundary(xc, m)
            normals, offsets = self._tangents(xc, m, pts)
            slack = self._sector_slack(pts, normals, offsets)
            if float(np.sum(slack)) <= TARGET_SLACK * 0.5 or xc.size >= MAX_CONSTRUCTION_POINTS:
                break
            # Halve the sectors with more than the average slack (an infinite slack,
            # tangents that meet on the wrong side, always qualifies).
            split = np.flatnonzero(slack >= np.mean(np.where(np.isfinite(slack), slack, 0.0)))
            split = split[:MAX_CONSTRUCTION_POINTS - xc.size]
            xc = np.unique(np.concatenate([xc, 0.5 * (xc[split] + xc[split + 1])]))
        diag = math.hypot(state["u_plus"], state["v_plus"] - state["v_minus"])
        chords = self._chords(pts)
        chords[:, 2] -= LINE_MARGIN * diag
        # Squeeze check: every boundary point between two construction points must
        # lie on or beyond their chord; only a convex A guarantees that.
        inside = (check_x > xc[0]) & (check_x < xc[-1])
        bx = check_x[inside]
        bp = self._boundary(bx, m)
        j = np.clip(np.searchsorted(xc, bx, side="right") - 1, 0, xc.size - 2)
        beyond = np.einsum("ij,ij->i", chords[j, :2], bp) - chords[j, 2]
        if np.any(beyond < 0):
            state["squeeze"] = "none: density not T_{-1/2}-concave"
            state["t_concavity"] = (f"a squeeze chord cuts region A near t = {bx[np.argmin(beyond)]:.6g} "
                                    "(A is not convex there)")
            return
        tables.update(construction_x=xc, points=pts, chords=chords)
        inner_area = 0.5 * float(np.sum(np.abs(_cross(pts[:-1], pts[1:]))))
        state["squeeze"] = f"inner polygon through {xc.size} boundary points of A (Leydold 2000)"
        state["squeeze_area_share"] = inner_area / 0.5
        # Tangent check: a tangent that cuts any boundary point of A is dropped (its
        # slope came out of a difference quotient that rounding spoilt, e.g. in a tail
        # close to 1/t^2 where dv/dx = u (1 + (t - m) f'/(2f)) nearly cancels).
        all_x = np.concatenate([check_x, xc])
        bp = self._boundary(all_x, m)
        excess = bp @ normals.T - (offsets + LINE_MARGIN * diag)[None, :]
        good = excess.max(axis=0) <= 0
        if not good.all():
            state["tangents_dropped"] = int((~good).sum())
        normals, offsets = normals[good], offsets[good]
        # Envelope: the rectangle cut by every tangent (shifted outwards by the margin).
        poly = np.array([[0.0, state["v_minus"]], [state["u_plus"], state["v_minus"]],
                         [state["u_plus"], state["v_plus"]], [0.0, state["v_plus"]]])
        # The ends of the support bound A too: lo <= v/u + m <= hi are the half-planes
        # (lo - m) u - v <= 0 and v - (hi - m) u <= 0 through the origin.
        cuts = [(n, c) for n, c in zip(normals, offsets + LINE_MARGIN * diag)]
        for end, n in ((lo, np.array([lo - m, -1.0])), (hi, np.array([m - hi, 1.0]))):
            if np.isfinite(end):
                cuts.append((n / np.hypot(*n), LINE_MARGIN * diag))
        for n, c in cuts:
            poly = _clip(poly, n, float(c))
            if len(poly) < 3:
                return
        area = float(np.sum(_fan(poly)[3]))
        rect_area = state["u_plus"] * (state["v_plus"] - state["v_minus"])
        state["polygon_area"] = area
        tables["polygon"] = poly
        # The polygon costs a third uniform per candidate but spares nearly all the
        # rejections and density evaluations; once it is under 90% of the rectangle
        # that pays for any density dearer than a uniform.
        if self.envelope_request == "polygon" or (self.envelope_request == "auto" and area < 0.9 * rect_area):
            state["envelope"] = "polygon"

    def _install(self, state: dict, tables: dict) -> None:
        """Set the drawing state from plain numbers and arrays (the same path for set-up and load)."""
        self.state = dict(state)
        self.centre = float(state["centre"])
        self.u_plus, self.v_minus, self.v_plus = state["u_plus"], state["v_minus"], state["v_plus"]
        self.construction_x = np.asarray(tables["construction_x"], dtype=float)
        self.points = np.asarray(tables["points"], dtype=float).reshape(-1, 2)
        self.chords = np.asarray(tables["chords"], dtype=float).reshape(-1, 3)
        self.polygon = np.asarray(tables["polygon"], dtype=float).reshape(-1, 2)
        self.envelope = state["envelope"]
        rect_area = self.u_plus * (self.v_plus - self.v_minus)
        if self.envelope == "polygon":
            apex, e1, e2, area, self._tri_sector = _sector_triangles(self.polygon, self.points)
            self._tri = (apex[:, 0], apex[:, 1], e1[:, 0], e1[:, 1], e2[:, 0], e2[:, 1])
            self._tri_rows = np.ascontiguousarray(np.column_stack(self._tri))    # for the compiled pass
            env_area = float(np.sum(area))
            self._alias_prob, self._alias = alias_table(area / env_area)
        else:
            env_area = rect_area
        # area(A) = 1/2 for a normalised density (Kinderman & Monahan 1977).
        self.expected_acceptance = min(0.5 / env_area, 1.0)
        squeeze = state["squeeze"] or "none"
        self.extra_stats.update({
            "variant": "general", "envelope": self.envelope, "squeeze": squeeze,
            "mode": self.centre, "u_plus": self.u_plus, "v_minus": self.v_minus, "v_plus": self.v_plus,
            "hat_area": env_area / 0.5, "rectangle_hat_area": rect_area / 0.5,
            "expected_acceptance": self.expected_acceptance,
            "rectangle_check": state["rectangle_check"],
        })
        for key in ("t_concavity", "squeeze_area_share", "polygon_area", "tangents_dropped"):
            if key in state:
                self.extra_stats[key] = state[key]
        if self.construction_x.size:
            self.extra_stats["construction_points"] = int(self.construction_x.size)

    # ---- drawing -----------------------------------------------------------------------
    def _candidates(self, k: int, rng: np.random.Generator):
        """k points uniform on the envelope, and the squeeze sector of each where known
        (rectangle: 2 uniforms a point; polygon: 3, one picks the triangle)."""
        if self.envelope == "polygon":
            # Triangle by its area, in constant time: Walker's alias method (Walker 1977,
            # ACM TOMS 3(3) 253-256) on one uniform, whose integer part picks a column.
            n = self._alias.size
            pick = rng.random(k) * n
            j = pick.astype(np.int64)
            np.minimum(j, n - 1, out=j)
            j = np.where(pick - j < self._alias_prob.take(j), j, self._alias.take(j))
            # (s, r) is uniform on the unit square; folding the half s + r > 1 onto the other
            # by (1 - s, 1 - r) preserves area, so apex + s e1 + r e2 is uniform on the triangle.
            s, r = rng.random(k), rng.random(k)
            flip = s + r > 1.0
            s = np.where(flip, 1.0 - s, s)
            r = np.where(flip, 1.0 - r, r)
            au, av, e1u, e1v, e2u, e2v = (c.take(j) for c in self._tri)
            return au + s * e1u + r * e2u, av + s * e1v + r * e2v, self._tri_sector.take(j)
        # 1 - U lies in (0, 1], so u > 0 and v/u stays finite.
        u = self.u_plus * (1.0 - rng.random(k))
        v = self.v_minus + (self.v_plus - self.v_minus) * rng.random(k)
        return u, v, None

    def _in_squeeze(self, u, v, x, sector=None) -> np.ndarray:
        """Inside the triangle (origin, P_j, P_j+1) of the sector j that x = v/u + m falls in."""
        n = self.chords.shape[0]
        if n == 0:
            return np.zeros(u.shape, dtype=bool)
        if sector is None:
            sector = np.searchsorted(self.construction_x, x, side="right") - 1
            sector = np.where(sector < n, sector, -1)
        # u > 0 also keeps out a candidate rounded onto the u = 0 edge, whose v/u is no age.
        valid = (sector >= 0) & (u > 0)
        j = np.maximum(sector, 0)
        a, b, c = self.chords[:, 0].take(j), self.chords[:, 1].take(j), self.chords[:, 2].take(j)
        return valid & (a * u + b * v <= c)

    def _classify(self, u, v, sector=None):
        """x, squeezed (accepted without f), accepted, and how many densities were evaluated."""
        with np.errstate(divide="ignore", invalid="ignore"):
            x = v / u + self.centre
        squeezed = self._in_squeeze(u, v, x, sector)
        accepted, evals = self._density_test(u, x, squeezed)
        return x, squeezed, accepted, evals

    def _density_test(self, u, x, squeezed):
        """Accepted candidates: the squeezed ones, and of the others those with u^2 <= f(x) (the
        boundary of region A); and how many densities that took."""
        accepted = squeezed.copy()
        rest = np.flatnonzero(~squeezed)
        if rest.size:
            with np.errstate(invalid="ignore"):
                accepted[rest] = u[rest] * u[rest] <= self.target.pdf(x[rest])
        return accepted, int(rest.size)

    def _compiled_round(self, k: int, rng: np.random.Generator):
        """_candidates and _classify for the polygon envelope in one compiled pass (engine.kernels.
        rou_polygon), from the same uniforms in the same order; only the candidates outside the
        squeeze go to the density."""
        pick, s, r = rng.random(k), rng.random(k), rng.random(k)
        u, x, squeezed = kernels.rou_polygon(pick, s, r, self._alias_prob, self._alias, self._tri_rows,
                                             self._tri_sector, self.chords, self.centre)
        accepted, evals = self._density_test(u, x, squeezed)
        return x, squeezed, accepted, evals

    def _fill(self, out, rng):
        m = out.size
        filled = 0
        per_candidate = 3 if self.envelope == "polygon" else 2
        compiled = self.envelope == "polygon" and kernels.HAVE_JIT
        while filled < m:
            need = m - filled
            # About one binomial sd more candidates than the shortfall needs: a second
            # (small) round is rare, and the surplus thrown away stays well under 1%.
            k = int(need / self.expected_acceptance + math.sqrt(need) + 16)
            if compiled:
                x, squeezed, accepted, evals = self._compiled_round(k, rng)
            else:
                u, v, sector = self._candidates(k, rng)
                x, squeezed, accepted, evals = self._classify(u, v, sector)
            self.counts["uniforms"] += per_candidate * k
            self.counts["candidates"] += k
            self.counts["density_evals"] += evals
            self.counts["squeezed"] += int(squeezed.sum())
            self.counts["accepted"] += int(accepted.sum())
            got = x.take(np.flatnonzero(accepted)[:need])
            out[filled:filled + got.size] = got
            filled += got.size

    # ---- pictures and persistence --------------------------------------------------------
    def geometry(self, n_points: int = 400, rng=0) -> dict[str, Any]:
        t = self.target
        p = np.concatenate([np.logspace(-8, -2, 25), np.linspace(0.01, 0.99, max(n_points - 50, 10)),
                            1 - np.logspace(-2, -8, 25)])
        x = np.unique(np.concatenate([t.quantile(p), [self.centre]]))
        x = x[(x > t.support[0]) & (x < t.support[1])]
        b = self._boundary(x, self.centre)
        rng = np.random.default_rng(rng)
        u, v, sector = self._candidates(n_points, rng)
        _, squeezed, accepted, _ = self._classify(u, v, sector)
        label = np.where(squeezed, "squeeze", np.where(accepted, "accepted", "rejected"))
        inner = (np.vstack([[0.0, 0.0], self.points, [0.0, 0.0]]) if self.points.size else np.empty((0, 2)))
        outer = np.vstack([self.polygon, self.polygon[:1]]) if self.polygon.size else np.empty((0, 2))
        return {"method": self.method, "variant": "general", "envelope": self.envelope, "mode": self.centre,
                "boundary_x": x, "boundary_u": b[:, 0], "boundary_v": b[:, 1],
                "u_plus": self.u_plus, "v_minus": self.v_minus, "v_plus": self.v_plus,
                "rectangle_u": np.array([0.0, self.u_plus, self.u_plus, 0.0, 0.0]),
                "rectangle_v": np.array([self.v_minus, self.v_minus, self.v_plus, self.v_plus, self.v_minus]),
                "inner_u": inner[:, 0], "inner_v": inner[:, 1],
                "outer_u": outer[:, 0], "outer_v": outer[:, 1],
                "candidates_u": u, "candidates_v": v, "candidates_label": label}

    def _tables(self):
        return {"construction_x": self.construction_x, "points": self.points, "chords": self.chords,
                "polygon": self.polygon}

    def _meta(self):
        return {"envelope_request": self.envelope_request, "state": self.state}

    def _restore(self, meta, tables):
        # Every number and table is checked before the envelope is rebuilt from them.
        self.envelope_request = table_checks.choice(meta, "envelope_request", ("auto", "rectangle", "polygon"))
        state = dict(table_checks.mapping(meta, "state"))
        number = table_checks.number
        state["centre"] = number(state, "centre")
        state["u_plus"] = number(state, "u_plus", low=np.finfo(float).tiny)
        state["v_minus"] = number(state, "v_minus", high=0.0)
        state["v_plus"] = number(state, "v_plus", low=0.0)
        if not state["v_plus"] > state["v_minus"]:
            raise ModelError("path", "the sampler file's envelope has v_plus <= v_minus; the file is damaged")
        table_checks.choice(state, "envelope", ("rectangle", "polygon"))
        state.setdefault("squeeze", "")
        state.setdefault("rectangle_check", "")
        check = table_checks.table
        xc = check(tables, "construction_x", nondecreasing=True, allow_empty=True)
        n = xc.size
        clean = {"construction_x": xc,
                 "points": check(tables, "points", ndim=2, length=n, columns=2, allow_empty=True),
                 "chords": check(tables, "chords", ndim=2, length=max(n - 1, 0), columns=3, allow_empty=True),
                 "polygon": check(tables, "polygon", ndim=2, columns=2,
                                  allow_empty=state["envelope"] != "polygon")}
        if state["envelope"] == "polygon" and (n < 2 or clean["polygon"].shape[0] < 3):
            raise ModelError("path", "the sampler file's polygon envelope has too few corners; the file is damaged")
        self._install(state, clean)
        if not (0.0 < self.expected_acceptance <= 1.0) or not np.all(np.isfinite(getattr(self, "_alias_prob", 0.0))):
            raise ModelError("path", "the sampler file's envelope has no area; the file is damaged")
