"""Cold standby with perfect switching: the system life is the sum of the parts' lives, whose
law is built by a recursion in the number of parts, so the cost grows linearly with it.

R(t) = R_1(t) + integral_0^t f_1(s) R_rest(t - s) ds is the convolution of NIST/SEMATECH
e-Handbook 8.1.8.5, applied one part at a time (T_1 + (T_2 + (... + T_n))). Up to three parts
every level is integrated exactly (nested adaptive quadrature, relative 1e-10); beyond, each
partial sum T_k + ... + T_n is tabulated once on an adaptive grid (log F and log R by cubic
splines in log-age, refined until they reproduce the exact convolution at every interval's
midpoint to TABLE_TOLERANCE) and the next level integrates against that table.
"""
from __future__ import annotations

import json
import math

import numpy as np
from scipy.interpolate import PPoly, make_interp_spline

from .errors import ModelError
from .system_numerics import EPSREL, adaptive_integral, plain_spec
from .system_parts import Block, Component
from .system_structures import System, masked_sf_cdf

# Up to this many parts the levels are nested exactly; beyond, partial sums are tabulated.
EXACT_PARTS = 3
# Largest absolute error allowed in log F and log R of a tabulated partial sum (so a
# relative error in F and R), checked at the midpoint of every grid interval where F and R
# are above CHECKED_TAIL. It sits a little above the noise of the values it is checked
# against (quadrature to 1e-10 against the previous level's table).
TABLE_TOLERANCE = 4e-9
# Grid nodes allowed per tabulated partial sum; reaching it leaves the table as it stands.
MAX_TABLE_NODES = 8000
# The table spans ages where F and R are both above this; beyond, the tails are extended
# by their end slopes in log-age (a power law below, a straight log R above).
TABLE_TAIL = 1e-30
CHECKED_TAIL = 1e-25
SPLINE_DEGREE = 5
# Nodes of the first grid; a denser start saves refinement rounds, which are what cost.
INITIAL_NODES = 321


class Convolution(Block):
    """T = T_first + T_rest for independent blocks, by the handbook's convolution.

    The integral is written in the first part's probability scale, s = Q_1(v):
    R(t) = R_1(t) + integral_0^{F_1(t)} R_rest(t - Q_1(v)) dv, and F(t) likewise with F_rest
    (v up to 1/2; beyond, u = 1 - v on a log scale, so far-tail values keep their digits).
    That form needs no density, so density poles, atoms and failure-free periods cost
    nothing. When ``first`` is a system (no inverse CDF), the density form with f_1 is used.
    """

    def __init__(self, first: Block, rest: Block, epsrel: float = EPSREL):
        self._first, self._rest = first, rest
        self.epsrel = epsrel
        self.support = (first.support[0] + rest.support[0], first.support[1] + rest.support[1])

    def _sf_cdf(self, t):
        def inside(t):
            sf1, cdf1 = self._first._sf_cdf(t)
            integrals = self._convolve(t, cdf1, lambda ages: np.stack(self._rest._sf_cdf(ages)), 2)
            return sf1 + integrals[0], integrals[1]
        return masked_sf_cdf(self.support, t, inside)

    def _pdf(self, t):
        t = np.asarray(t, dtype=float)
        out = np.zeros_like(t)
        lo, hi = self.support
        inside = (t > lo) & (t < hi)
        if np.any(inside):
            ti = t[inside]
            cdf1 = self._first._sf_cdf(ti)[1]
            out[inside] = self._convolve(ti, cdf1, self._rest._pdf, 1)[0]
        return out

    def _convolve(self, t, cdf1, g, rows):
        """For each t, the integral over the first part's life s <= t of g(t - s) (``rows`` rows)."""
        first = self._first
        if not isinstance(first, Component):
            lo1 = first.support[0]
            span = np.maximum(t - lo1, 0.0)

            def in_time(idx, w):
                s = lo1 + span[idx] * w
                return span[idx] * first._pdf(s) * g(t[idx] - s).reshape(rows, -1)
            return adaptive_integral(in_time, t.size, rows, epsrel=self.epsrel)

        # Lower half of the first part's probability scale: s = Q_1(v), v in [0, min(F_1(t), 1/2)].
        top = np.minimum(cdf1, 0.5)

        def lower(idx, w):
            v = top[idx] * w
            return top[idx] * g(t[idx] - first.quantile(v)).reshape(rows, -1)
        total = adaptive_integral(lower, t.size, rows, epsrel=self.epsrel)
        # Upper half, where F_1(t) > 1/2: s = Q_1(1 - u) with u from 1/2 down to R_1(t) on a log
        # scale, because there the mass sits within R_1(t) of 1 (far below double resolution in v).
        upper = np.flatnonzero(cdf1 > 0.5)
        if upper.size:
            tu = t[upper]
            log_half = math.log(0.5)
            log_end = np.log(np.maximum(first._sf_cdf(tu)[0], 1e-300))

            def in_survival(idx, w):
                u = np.exp(log_half + w * (log_end[idx] - log_half))
                return (log_half - log_end[idx]) * u * g(tu[idx] - first.isf(u)).reshape(rows, -1)
            total[:, upper] += adaptive_integral(in_survival, upper.size, rows, epsrel=self.epsrel)
        return total

    def _scale_points(self):
        # A sum lives on the scale of the summed parts: add their middle and far points.
        own = [self._first._scale_points(), self._rest._scale_points()]
        sums = [sum(float(np.median(q)) for q in own if q.size), sum(float(q.max()) for q in own if q.size)]
        return np.unique(np.concatenate([np.array(sums), *own]))


class TabulatedLaw(Block):
    """The law of a block, evaluated once on an adaptive grid and then interpolated.

    log F and log R are cubic splines in x = log(t - lo) (x = t when lo = -inf): a power
    law at the lower end and an exponential-type upper tail are then nearly straight lines.
    Nodes are added where the splines miss the block's own values at interval midpoints by
    more than ``tolerance``.
    """

    def __init__(self, block: Block, tolerance: float = TABLE_TOLERANCE, max_nodes: int = MAX_TABLE_NODES):
        self.block = block
        self.support = block.support
        self.name = ""
        lo, hi = self.support
        self._logscale = bool(np.isfinite(lo))
        a, b = self._ends()
        # Log-age suits a law whose mass starts at its lower end (a power law there); a sum of
        # many parts has its mass far from it, where even steps in age serve better.
        self._logscale = bool(np.isfinite(lo) and a - lo < 0.01 * (b - lo))
        x = np.linspace(self._to_x(a), self._to_x(b), INITIAL_NODES)
        logF, logR = self._exact(x)
        floor = math.log(CHECKED_TAIL)
        while True:
            self._fit(x, logF, logR)
            # Every interval's midpoint is checked each round: one vectorised call, and the
            # rounds (each a Python-level quadrature) are what cost, not the points.
            mid = 0.5 * (x[:-1] + x[1:])
            mF, mR = self._exact(mid)
            # The exact values carry the quadrature's relative error (EPSREL) in F and R, i.e.
            # an absolute one in their logs; asking more of the table would chase that noise.
            # Beyond CHECKED_TAIL a value only needs to stay negligible, not to keep its digits.
            err = np.maximum(np.where(mF > floor, np.abs(self._splF(mid) - mF), 0.0),
                             np.where(mR > floor, np.abs(self._splR(mid) - mR), 0.0))
            bad = ~(err <= tolerance)
            if not bad.any() or x.size + bad.sum() > max_nodes:
                break
            order = np.argsort(np.concatenate([x, mid[bad]]))
            x = np.concatenate([x, mid[bad]])[order]
            logF = np.concatenate([logF, mF[bad]])[order]
            logR = np.concatenate([logR, mR[bad]])[order]
        self.max_error = float(np.max(err)) if err.size else 0.0
        self.nodes = x.size

    # ---- the grid ---------------------------------------------------------------------------
    def _to_x(self, t):
        lo = self.support[0]
        if self._logscale:
            with np.errstate(divide="ignore"):
                return np.log(np.maximum(np.asarray(t, dtype=float) - lo, 0.0))
        return np.asarray(t, dtype=float)

    def _to_t(self, x):
        return self.support[0] + np.exp(x) if self._logscale else x

    def _ends(self):
        """Ages where F (below) and R (above) fall to TABLE_TAIL, from one vectorised look at a
        ladder of ages: halving towards the lower end (or stepping down) and doubling up."""
        lo, hi = self.support
        pts = self.block._scale_points()
        pts = pts[np.isfinite(pts)]
        centre = float(np.median(pts)) if pts.size else (lo + 1.0 if np.isfinite(lo) else 0.0)
        spread = max(float(np.ptp(pts)) if pts.size > 1 else abs(centre), 1e-300)
        steps = 2.0 ** np.arange(0, 1000)
        if np.isfinite(lo):
            down = lo + (centre - lo) / steps
            down = down[down > lo]
        else:
            down = centre - spread * steps[:1000]
        up = centre + spread * steps[:1000]
        up = up[np.isfinite(up) & (up < hi)]
        ladder = np.concatenate([down, up])
        sf, cdf = self.block._sf_cdf(ladder)
        low_ok = np.flatnonzero(cdf[:down.size] <= TABLE_TAIL)
        high_ok = np.flatnonzero(sf[down.size:] <= TABLE_TAIL)
        a = down[low_ok[0]] if low_ok.size else down[-1]
        b = up[high_ok[0]] if high_ok.size else (np.nextafter(hi, -np.inf) if np.isfinite(hi) else up[-1])
        if not (np.isfinite(a) and np.isfinite(b) and b > a):
            raise ModelError("parts", "the standby parts' laws could not be tabulated (no finite range "
                                      "holds their sum's mass)")
        return float(a), float(b)

    def _exact(self, x):
        sf, cdf = self.block._sf_cdf(self._to_t(x))
        with np.errstate(divide="ignore"):
            return np.log(np.maximum(cdf, 1e-320)), np.log(np.maximum(sf, 1e-320))

    def _fit(self, x, logF, logR):
        self._x = x
        # Quintic splines (error O(h^6)), held as piecewise polynomials for fast evaluation.
        self._splF = PPoly.from_spline(make_interp_spline(x, logF, k=SPLINE_DEGREE))
        self._splR = PPoly.from_spline(make_interp_spline(x, logR, k=SPLINE_DEGREE))
        self._dF = self._splF.derivative()
        self._dR = self._splR.derivative()
        # Values and slopes at the ends, for the straight-line extension beyond the grid.
        self._endF = (float(self._splF(x[0])), float(self._dF(x[0])))
        self._endR = (float(self._splR(x[-1])), float(self._dR(x[-1])))

    # ---- the law ------------------------------------------------------------------------------
    def _logs(self, x):
        """log F and log R, with straight-line extension in x beyond the grid."""
        x0, x1 = self._x[0], self._x[-1]
        xc = np.clip(x, x0, x1)
        logF, logR = self._splF(xc), self._splR(xc)
        below, above = x < x0, x > x1
        if below.any():
            logF = np.where(below, self._endF[0] + self._endF[1] * (x - x0), logF)
        if above.any():
            logR = np.where(above, self._endR[0] + self._endR[1] * (x - x1), logR)
        return np.minimum(logF, 0.0), np.minimum(logR, 0.0), below, above

    def _sf_cdf(self, t):
        def inside(t):
            logF, logR, below, above = self._logs(self._to_x(t))
            F, R = np.exp(logF), np.exp(logR)
            # Each of F and R from its own spline; the complement only where the table ends.
            F = np.where(above, -np.expm1(logR), F)
            R = np.where(below, -np.expm1(logF), R)
            return R, F
        return masked_sf_cdf(self.support, t, inside)

    def _pdf(self, t):
        t = np.asarray(t, dtype=float)
        out = np.zeros_like(t)
        lo, hi = self.support
        inside = (t > lo) & (t < hi)
        if np.any(inside):
            x = self._to_x(t[inside])
            dx_dt = np.exp(-x) if self._logscale else 1.0
            logF, logR, _, _ = self._logs(x)
            xc = np.clip(x, self._x[0], self._x[-1])
            # f = F d(log F)/dt where F < 1/2, else -R d(log R)/dt (each side keeps its digits).
            from_F = np.exp(logF) * np.where(x < self._x[0], self._endF[1], self._dF(xc)) * dx_dt
            from_R = -np.exp(logR) * np.where(x > self._x[-1], self._endR[1], self._dR(xc)) * dx_dt
            out[inside] = np.maximum(np.where(logF < math.log(0.5), from_F, from_R), 0.0)
        return out

    def _scale_points(self):
        return self.block._scale_points()


class Standby(System):
    """Cold standby with perfect switching: T = T_1 + ... + T_n (e-Handbook 8.1.8.5).

    Up to EXACT_PARTS parts: T_1 + (T_2 + (... + T_n)), every level an exact nested integral,
    with a component (which has an inverse CDF) first. With more, the parts are summed as a
    balanced tree of halves, each inner sum a TabulatedLaw: n - 1 tables at most (linear in
    n), and halves made of the same parts share one table, so n identical units cost about
    log2(n) tables (200 units: seconds).
    """

    kind = "standby"

    def __init__(self, parts, name=""):
        super().__init__(parts, name)
        self.support = (sum(p.support[0] for p in self.parts), sum(p.support[1] for p in self.parts))
        order = sorted(range(len(self.parts)), key=lambda i: not isinstance(self.parts[i], Component))
        chain = [self.parts[i] for i in order]
        self._first = chain[0]
        self.tabulated = len(chain) > EXACT_PARTS
        if self.tabulated:
            self._law = self._tree(chain)
            return
        acc = chain[-1]
        for part in reversed(chain[:-1]):
            acc = Convolution(part, acc)
        self._law = acc

    @staticmethod
    def _tree(chain):
        """The sum as a balanced tree of halves; tables are shared between equal halves."""
        keys = [json.dumps(plain_spec(p.spec()), sort_keys=True) for p in chain]
        # The sum does not depend on the order, so equal parts are put side by side.
        order = sorted(range(len(chain)), key=lambda i: keys[i])
        chain, keys = [chain[i] for i in order], [keys[i] for i in order]
        memo: dict = {}

        def pair(left, right, epsrel):
            # A component goes first (the probability-scale form needs its inverse CDF).
            if isinstance(right, Component) and not isinstance(left, Component):
                left, right = right, left
            return Convolution(left, right, epsrel=epsrel)

        def build(lo, hi, top=False):
            if hi - lo == 1:
                return chain[lo]
            key = tuple(keys[lo:hi])
            if key in memo and not top:
                return memo[key]
            mid = (lo + hi) // 2
            left, right = build(lo, mid), build(mid, hi)
            if top:
                return pair(left, right, EPSREL)
            # Against a table good to TABLE_TOLERANCE, quadrature finer than a tenth of it buys nothing.
            memo[key] = TabulatedLaw(pair(left, right, TABLE_TOLERANCE / 10))
            return memo[key]

        return build(0, len(chain), top=True)

    def _draw(self, m, rng):
        return np.sum(self._part_draws(m, rng), axis=0)

    def mean(self) -> float:
        # E[T_1 + ... + T_n] = sum of the parts' means.
        return float(sum(p.mean() for p in self.parts))

    def _sf_cdf(self, t):
        return self._law._sf_cdf(t)

    def _pdf(self, t):
        return self._law._pdf(t)

    def _scale_points(self):
        # A sum lives on the scale of the summed parts: add their middle and far points.
        own = [p._scale_points() for p in self.parts]
        sums = [sum(float(np.median(q)) for q in own if q.size), sum(float(q.max()) for q in own if q.size)]
        return np.unique(np.concatenate([np.array(sums), *own]))
