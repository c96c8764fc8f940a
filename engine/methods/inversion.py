"""Inversion: X = F^-1(U). Closed form where the model has one; otherwise a
piecewise polynomial interpolation of the inverse CDF with a measured u-error.

Numerical inversion follows Derflinger, Hörmann & Leydold (2010), "Random variate
generation by numerical inversion when only the density is known", ACM TOMACS
20(4), article 18: polynomial interpolation of F^-1 on intervals, tails cut at
negligible mass, the u-error |u - F(F^-1_approx(u))| checked on every interval,
and a guide table (Chen & Asau 1974) for constant-time interval lookup.
"""
from __future__ import annotations

import math
from typing import Any

import numpy as np

from .. import kernels, table_checks
from ..check import measure_u_error
from ..errors import MethodNotApplicable
from ..numeric import mapped_grid
from ..target import Target
from .base import Sampler

ORDER = 5                    # polynomial degree of each piece (DHL 2010 recommend 3-5)
MAX_PIECES = 50_000
INITIAL_STEPS = 32           # first partition: equal steps of the target's mapped coordinate
BULK_STEPS = 32              # ... and near the quantiles k/BULK_STEPS, and 2^-k, 1 - 2^-k (k = 6, 7.5, ... 33) in the tails
QUANTILE_LEVELS = np.concatenate([np.arange(1, BULK_STEPS) / BULK_STEPS, 2.0 ** -np.arange(6.0, 34.0, 1.5),
                                  1.0 - 2.0 ** -np.arange(6.0, 34.0, 1.5)])
#: Geometric steps towards a finite start of life, as fractions of the first step of the mapped grid.
START_STEPS = np.logspace(-12, 0, 13)
START_STEPS.setflags(write=False)
#: Interpolation nodes of a piece in its own u-coordinate s: Chebyshev-Lobatto points on [0, 1].
NODES_S = 0.5 * (1.0 - np.cos(np.pi * np.arange(ORDER + 1) / ORDER))
#: u-error test points: three between each pair of neighbouring nodes (1/4, 1/2, 3/4 of the gap),
#: where the error curve, zero at the nodes, has its humps; and two next to the ends.
TEST_S = np.sort(np.concatenate([
    (NODES_S[:-1, None] + np.diff(NODES_S)[:, None] * np.array([0.25, 0.5, 0.75])[None, :]).ravel(),
    [1e-6, 1 - 1e-6]]))


def u_test_points(n: int = 20_000) -> np.ndarray:
    """A fixed spread of u over (0, 1): a uniform grid plus logit-spaced tails."""
    grid = (np.arange(n) + 0.5) / n
    tails = np.logspace(-14, -1, 200)
    return np.sort(np.concatenate([grid, tails, 1.0 - tails]))


class Inversion(Sampler):
    """X = F^-1(U) with one uniform per draw: exact where F^-1 is a closed form."""

    method = "inversion"
    reference = "Inversion with closed-form F^-1 (e.g. Devroye 1986, Non-Uniform Random Variate Generation, II.2)"

    @classmethod
    def build(cls, target: Target, tolerance: float = 1e-10, **options) -> Sampler:
        if cls is Inversion and not target.exact_quantile:
            return NumericalInversion.build(target, tolerance, **options)
        return super().build(target, tolerance, **options)

    def _setup(self) -> None:
        self.extra_stats["variant"] = "closed form"
        self.extra_stats["u_error"] = measure_u_error(self.target.quantile, self.target, u_test_points())

    def quantile(self, u):
        """The sampler's own F^-1 (here the target's closed form)."""
        return self.target.quantile(u)

    def _draw(self, m, rng):
        u = rng.random(m)
        self.counts["uniforms"] += m
        return self.target.quantile(u)

    def geometry(self, n_points: int = 400, rng=0) -> dict[str, Any]:
        u = np.concatenate([np.logspace(-6, -2, 40), np.linspace(0.01, 0.99, n_points), 1 - np.logspace(-2, -6, 40)])
        x = self.quantile(u)
        err = np.abs(np.where(u > 0.5, (1 - u) - self.target.sf(x), u - self.target.cdf(x)))
        return {"method": self.method, "u": u, "x": x, "u_error": err, "tolerance": self.tolerance}

    def _meta(self):
        return {"variant": "closed form", "u_error": self.extra_stats["u_error"]}

    def _restore(self, meta, tables):
        self.extra_stats["variant"] = "closed form"
        self.extra_stats["u_error"] = table_checks.number(meta, "u_error", low=0.0, optional=True)


class NumericalInversion(Inversion):
    """Piecewise polynomial F^-1 with a measured u-error (DHL 2010)."""

    reference = ("Derflinger, Hörmann & Leydold (2010), ACM TOMACS 20(4):18; "
                 "guide table: Chen & Asau (1974)")

    @classmethod
    def check_applicable(cls, target: Target) -> None:
        if target.atoms.size:
            raise MethodNotApplicable("method", "numerical inversion interpolates a continuous CDF; "
                                                "this model has atoms (use exact inversion)")

    # ---- set-up ------------------------------------------------------------------
    def _delta_u(self, upper, x, base=None):
        """F(x) - F(x_0) for rows of ages x, x_0 = the row's first age, and each row's base: F(x_0),
        or R(x_0) in the ``upper`` rows (x_0 at or beyond the model's median, found by ``_domain``),
        where the survival function keeps the digits that F runs out of. All rows in one call of the
        model (``Target.cdf_or_sf``); a base already known is passed in and x then omits x_0."""
        values = np.array(self.target.cdf_or_sf(x.ravel(), np.repeat(upper, x.shape[1])),
                          dtype=float).reshape(x.shape)
        if base is None:
            base = values[:, 0].copy()
        # In place: the differences, negated on the upper rows (R falls where F rises).
        values -= base[:, None]
        np.negative(values, out=values, where=upper[:, None])
        return values, base

    def _domain(self) -> tuple[float, float, float]:
        """Computational domain: tails beyond mass ``cut`` are cut (DHL 2010, sec. 4).

        Any end with at most ``cut`` beyond it will do (the mass actually cut is
        measured and counted in the u-error), so a scan of the coordinate grid
        replaces root solving. The same scan gives a point near the median, where
        ``_delta_u`` changes from F to the survival function. F is evaluated on the
        grid only for an infinite lower end or a finite support (whose upper tail
        is then cut by 1 - F), R only for an infinite upper end. A model that has F and
        R tabulated already (``Target.tabulated_cdf_sf``: a formula model at the edges of
        its integral's series) is scanned there, without a call of the model.
        """
        t = self.target
        cut = 0.05 * self.tolerance
        lo, hi = t.support
        tabulated = t.tabulated_cdf_sf()
        if tabulated is None:
            grid = mapped_grid(t.mapping)
            cdf_on_grid, sf_on_grid = (lambda: t.cdf(grid)), (lambda: t.sf(grid))
        else:
            grid, F_tabulated, S_tabulated = tabulated
            cdf_on_grid, sf_on_grid = (lambda: F_tabulated), (lambda: S_tabulated)
        a, b, lost = lo, hi, 0.0
        median = None
        if not np.isfinite(lo) or np.isfinite(hi):
            F_raw = np.asarray(cdf_on_grid(), dtype=float)
            F = np.maximum.accumulate(np.clip(F_raw, 0.0, 1.0))
            median = float(grid[min(int(np.searchsorted(F, 0.5)), grid.size - 1)])
            self._scan = (grid, F)
            if not np.isfinite(lo):
                i = int(np.flatnonzero(F <= cut)[-1]) if np.any(F <= cut) else 0
                a, lost = float(grid[i]), lost + float(F_raw[i])
            if np.isfinite(hi):
                # The upper tail of a finite support is cut as an infinite one is (1 - F keeps its
                # absolute digits to about 1e-16, far below the cut): a hazard model's support ends
                # where R underflows, far beyond the last mass that a uniform resolves.
                i = int(np.flatnonzero(1.0 - F <= cut)[0])
                b, lost = float(grid[i]), lost + max(float(1.0 - F_raw[i]), 0.0)
        if not np.isfinite(hi):
            S_raw = np.asarray(sf_on_grid(), dtype=float)
            S = np.minimum.accumulate(np.clip(S_raw, 0.0, 1.0))
            i = int(np.flatnonzero(S <= cut)[0]) if np.any(S <= cut) else grid.size - 1
            b, lost = float(grid[i]), lost + float(S_raw[i])
            if median is None:
                median = float(grid[int(np.argmax(S <= 0.5))] if np.any(S <= 0.5) else grid[-1])
                self._scan = (grid, 1.0 - S)
        if not (np.isfinite(a) and np.isfinite(b) and a < b):
            raise MethodNotApplicable("method", "numerical inversion could not bound the model's tails")
        self._median = median
        return a, b, lost

    def _initial_edges(self, a, b):
        """A first partition from the target's coordinate map (no root solving): equal steps in the
        mapped coordinate, plus ages near fixed quantiles read off the domain's scan; together they
        leave two fitting rounds (the first splits what fails, the second confirms) on the bench targets."""
        t = self.target
        m = t.mapping
        ylo, yhi = m.y_range
        grid = m.to_t(np.linspace(ylo, yhi, INITIAL_STEPS + 1)[1:-1])
        extra = [x for x in getattr(t, "breakpoints", lambda: [])()]
        # Ages near the quantiles k/BULK_STEPS, read off the domain's scan (F on the mapped grid,
        # linear between its points): the mapped grid follows the support map, these follow the mass.
        scan_t, scan_F = self._scan
        quantiles = np.interp(QUANTILE_LEVELS, scan_F, scan_t)
        pts = [grid, [a, b], extra, quantiles]
        if np.isfinite(t.support[0]) and a == t.support[0]:
            # Geometric steps towards a finite start of life: a pole there, or a density that
            # starts like a power of the age, leaves F^-1 far from polynomial next to it.
            first = grid[grid > a][0] if np.any(grid > a) else b
            steps = a + (first - a) * START_STEPS
            # Below the last step where the scan finds next to no mass (F <= 1e-14 at the grid age
            # above it) one piece does (linear, its u-error at most its mass): the steps under it
            # would only cost evaluations next to the start.
            empty = np.flatnonzero(np.interp(steps, scan_t, scan_F) <= 1e-14)
            pts.append(steps[empty[-1]:] if empty.size else steps)
        edges = np.unique(np.concatenate([np.asarray(p, dtype=float) for p in pts]))
        return edges[(edges >= a) & (edges <= b) & np.isfinite(edges)]

    def _fit_pieces(self, x0, x1):
        """Fit the interpolating polynomial of each piece; return coefficients, masses, F at the
        starts and u-errors. Two calls of the model (the nodes, then the test points between them)
        and two compiled passes (the polynomials and where they put the test points, then the
        u-errors), each with a numpy twin."""
        w = x1 - x0
        upper = x0 >= self._median
        xs = x0[:, None] + w[:, None] * NODES_S[None, :]     # the first node is x0 itself: the base
        du, base = self._delta_u(upper, xs)
        F_at = np.where(upper, 1.0 - base, base)
        total = du[:, -1].copy()
        coef, x_test, status = kernels.inverse_pieces(x0, w, du, NODES_S, TEST_S, 0.5 * self.tolerance)
        # Only a fitted polynomial's test points are read: a linear piece's u-error is its mass (the
        # bound that made it linear), a failed fit's is infinite. So the model is called for those only
        # (a linear piece next to the start of life would ask for F at ages where its series is not trusted).
        fitted = status == kernels.FITTED
        if fitted.all():
            du_test, _ = self._delta_u(upper, x_test, base)
        else:
            du_test = np.zeros(x_test.shape)
            if fitted.any():
                du_test[fitted], _ = self._delta_u(upper[fitted], x_test[fitted], base[fitted])
        err = kernels.inverse_piece_errors(du_test, total, TEST_S, status)
        return coef, total, F_at, err

    def _construct(self, x0, x1):
        """Fit pieces, splitting the failing ones, until each passes its u-error test."""
        budget = 0.5 * self.tolerance
        done = []
        rounds = 0
        while x0.size:
            rounds += 1
            fitted = self._fit_pieces(x0, x1)
            err = fitted[-1]
            ok = err <= budget
            done.append((x0[ok], x1[ok], *(part[ok] for part in fitted)))
            bad = ~ok
            if not np.any(bad):
                break
            xa, xb, eb = x0[bad], x1[bad], err[bad]
            # The interpolation error of a degree-k piece shrinks like h^(k+1)
            # (DHL 2010, sec. 3), so split each failing piece into as many parts
            # as that rate says it needs, with a margin: few rounds, not bisection.
            with np.errstate(divide="ignore", invalid="ignore"):
                parts = np.ceil(1.25 * (eb / budget) ** (1.0 / (ORDER + 1)))
            # A piece whose polynomial failed outright (not increasing: no error to go by) is cut in 16,
            # which the bench targets' pieces next to a power-law start or in a tail were measured to need.
            parts = np.where(np.isfinite(parts), parts, 16.0)
            parts = np.clip(parts, 2, 64).astype(np.int64)
            x0, x1 = _split(xa, xb, parts)
            self._pieces_so_far = sum(d[0].size for d in done) + x0.size
            if self._pieces_so_far > MAX_PIECES or rounds > 200:
                raise MethodNotApplicable("tolerance", f"numerical inversion needs more than {MAX_PIECES} "
                                                       f"pieces to reach a u-error of {self.tolerance:g} "
                                                       "here; relax the tolerance")
        return [np.concatenate([d[i] for d in done]) for i in range(6)]

    def _setup(self) -> None:
        a, b, cut = self._domain()
        edges = self._initial_edges(a, b)
        x0, x1, coef, total, F_at, err = self._construct(edges[:-1], edges[1:])
        order = np.argsort(x0)
        self.x0, self.width, self.coef = x0[order], (x1 - x0)[order], coef[order]
        self.du = total[order]
        F_at, err = F_at[order], err[order]
        self.u_start = F_at[0] + np.concatenate([[0.0], np.cumsum(self.du)[:-1]])
        self.u_end = float(self.u_start[-1] + self.du[-1])
        self._build_guide()
        self.tail_cut = cut
        # Reported u-error: each piece's own error (measured where its error curve peaks, between
        # the interpolation nodes), plus how far its cumulative start drifted from the model's F
        # there (F at every start was evaluated when the piece was fitted), plus the tails cut.
        drift = np.abs(F_at - self.u_start)
        self.extra_stats.update({"variant": "piecewise polynomial", "pieces": int(self.x0.size),
                                 "order": ORDER, "u_error": float(max(np.max(err + drift), cut))})

    def _build_guide(self):
        m = self.x0.size
        # 32 cells per piece: a draw then needs a step past its cell's first piece only
        # about one time in 32, which keeps the search branch predictable; the table
        # (4 bytes a cell when drawing) still fits the core's fast caches. Measured against
        # 8, 16 and 64 cells per piece on the bench targets: 32 was the quickest.
        # guide[i] = first piece whose start is <= i/size < its end (a compiled merge, kernels.guide_table).
        self.guide = kernels.guide_table(self.u_start, 32 * m)
        self._derive()

    def _derive(self):
        """Drawing-time forms of the tables (not saved: rebuilt from them)."""
        self._guide32 = self.guide.astype(np.int32)
        self._packed = kernels.pack_pinv_table(self.x0, self.width, self.coef, self.du)

    # ---- evaluation ----------------------------------------------------------------
    def quantile(self, u):
        """The approximate F^-1 used for drawing (vectorised)."""
        u = np.asarray(u, dtype=float)
        x = kernels.pinv_eval(u.ravel(), self._guide32, self.u_start, self._packed)
        return x.reshape(u.shape) if u.ndim else float(x[0])

    own_inverse = True

    def upper_inverse(self, w, survive):
        """The polynomial at u = 1 - w where R(a) >= 1/2 (the residual's u-error then stays within
        twice the sampler's). Deeper, the polynomial's value polished by a Newton step on the
        target's exact R (its relative error then falls to about (u-error / R(a))^2); in the far tail
        (w < 1e-6, beyond the polynomial's digits) the target's exact inverse survival function."""
        w = np.asarray(w, dtype=float)
        survive = np.asarray(survive, dtype=float)
        young = survive >= 0.5
        far = ~young & (w < 1e-6)
        mid = ~young & ~far
        out = np.empty(w.shape)
        if young.any():
            out[young] = self.quantile(1.0 - w[young])
        if mid.any():
            x = np.asarray(self.quantile(1.0 - w[mid]), dtype=float)
            lo, hi = self.target.support
            for _ in range(1):
                f = np.asarray(self.target.pdf(x), dtype=float)
                with np.errstate(all="ignore"):
                    step = (np.asarray(self.target.sf(x), dtype=float) - w[mid]) / f
                nxt = x + step
                x = np.where(np.isfinite(nxt) & (f > 0) & (nxt > lo) & (nxt < hi), nxt, x)
            out[mid] = x
        if far.any():
            out[far] = self.target.isf(w[far])
        return out

    def _fill(self, out, rng):
        # Uniforms are drawn straight into the output and transformed in place.
        rng.random(out=out)
        self.counts["uniforms"] += out.size
        kernels.pinv_eval(out, self._guide32, self.u_start, self._packed, out=out)

    def geometry(self, n_points: int = 400, rng=0) -> dict[str, Any]:
        out = super().geometry(n_points, rng)
        out["piece_starts"] = self.x0.copy()
        return out

    # ---- persistence -----------------------------------------------------------------
    def _tables(self):
        return {"x0": self.x0, "width": self.width, "coef": self.coef, "du": self.du,
                "u_start": self.u_start, "guide": self.guide}

    def _meta(self):
        return {"variant": "piecewise polynomial", "u_end": self.u_end, "tail_cut": self.tail_cut,
                "stats": {k: self.extra_stats[k] for k in ("pieces", "order", "u_error")}}

    def _restore(self, meta, tables):
        # Every table is checked against the others before the kernel indexes with it.
        check = table_checks.table
        self.x0 = check(tables, "x0", nondecreasing=True)
        m = self.x0.size
        self.width = check(tables, "width", length=m, low=0.0)
        self.coef = check(tables, "coef", ndim=2, length=m, columns=ORDER + 1)
        # Cumulative sums may pass 1 by rounding; a little room, no more.
        self.du = check(tables, "du", length=m, low=0.0, high=1.0 + 1e-9)
        self.u_start = check(tables, "u_start", length=m, low=0.0, high=1.0 + 1e-9, nondecreasing=True)
        self.guide = check(tables, "guide", kind="int", low=0, high=m - 1)
        self._derive()
        self.u_end = table_checks.number(meta, "u_end", low=0.0, high=1.0 + 1e-9)
        self.tail_cut = table_checks.number(meta, "tail_cut", low=0.0, high=1.0)
        self.extra_stats.update({"variant": "piecewise polynomial", **table_checks.mapping(meta, "stats")})


def _split(xa, xb, parts):
    """Cut each [xa_i, xb_i] into parts_i pieces: geometric across wide positive
    ranges (heavy tails, poles), equal otherwise."""
    idx = np.repeat(np.arange(xa.size), parts)
    first = np.concatenate([[0], np.cumsum(parts)[:-1]])
    j = np.arange(idx.size) - first[idx]
    a, b, q = xa[idx], xb[idx], parts[idx]
    geometric = (a > 0) & (b > 4 * a)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(geometric, b / np.where(a > 0, a, 1.0), 1.0)
        start_g = a * ratio ** (j / q)
        end_g = a * ratio ** ((j + 1) / q)
    start = np.where(geometric, start_g, a + (b - a) * j / q)
    end = np.where(geometric, end_g, a + (b - a) * (j + 1) / q)
    end = np.where(j == q - 1, b, end)
    return start, end
