"""Numerical building blocks shared by the models: coordinate maps for infinite
supports, cumulative integrals to near machine precision, and vectorised inversion.

Integration is adaptive Gauss-Legendre with a halving error estimate (Davis &
Rabinowitz, Methods of Numerical Integration, 2nd ed., ch. 6); roots use
Chandrupatla's bracketing method (Chandrupatla 1997, Adv. Eng. Software 28(3)).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from .errors import ModelError
from .piece_series import PieceSeries

_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(10)
# Parts of a graded split of the first piece at a finite lower end (the smallest is 2^-8 of it).
GRADED_STEPS = 8
# Points a Gauss rule never sees (the ends) are probed separately by the models.


def gauss_jacobi(n: int, alpha: float):
    """Nodes and weights of the n-point Gauss rule for the weight (1 + x)**alpha on [-1, 1], alpha > -1.

    Golub & Welsch (1969, Math. Comp. 23): the nodes are the eigenvalues of the symmetric tridiagonal
    Jacobi matrix of P_k^(0, alpha) (recurrence coefficients: Szego, Orthogonal Polynomials, 4th ed.,
    1975, (4.5.1)), the weights the squared first components of its eigenvectors, scaled here to sum to
    the weight's exact integral 2**(alpha + 1)/(alpha + 1). One LAPACK call (numpy.linalg.eigh).
    """
    k = np.arange(n) * 1.0
    s = 2.0 * k + alpha
    diag = alpha * alpha / (s * (s + 2.0))
    diag[0] = alpha / (alpha + 2.0)
    m = k[1:]
    t = 2.0 * m + alpha
    off = np.sqrt(4.0 * m * m * (m + alpha) * (m + alpha) / (t * t * (t + 1.0) * (t - 1.0)))
    x, vectors = np.linalg.eigh(np.diag(diag) + np.diag(off, 1) + np.diag(off, -1))
    w = vectors[0] ** 2
    return x, w * (2.0 ** (alpha + 1.0) / (alpha + 1.0) / np.sum(w))


def _jacobi_rule(alpha: float):
    """Gauss-Jacobi nodes for the weight s**alpha on [0, 1] (from the (1-x)**0 (1+x)**alpha rule on
    [-1, 1], s = (1+x)/2). Computed for every model: the exponent comes from the model's own
    numbers, and no number is kept from one model to the next."""
    x, w = gauss_jacobi(12, alpha)
    return (1.0 + x) / 2.0, w / 2.0 ** (alpha + 1.0), alpha


@dataclass(frozen=True)
class SupportMap:
    """A smooth monotone map y -> t from a finite y-interval onto the support.

    Infinite ends are reached through t = a + c*w/(1-w) style maps, so that an
    adaptive rule on a finite y-interval covers the whole support; ``centre``
    and ``scale`` put the bulk of the mass near the middle of the y-interval.
    At a finite lower end, w = y**power: with power = 1/(alpha + 1) for an
    integrand behaving like (t - lo)**alpha there, the mapped integrand is
    nearly constant, so a pole or a fractional power costs no accuracy.
    """

    lo: float
    hi: float
    centre: float
    scale: float
    power: float = 1.0
    tail_power: float = 1.0
    #: > 0 selects the log-age map t = lo + scale*expm1(z*log_span), z = y**power, on a
    #: finite [lo, hi] that spans many decades (log_span = ln(1 + (hi - lo)/scale)).
    log_span: float = 0.0
    #: The exponent alpha of the density this map was chosen for, density ~ (t - lo)**alpha at a finite
    #: lower end, as ``lower_end_exponent`` measured it (None: not measured, or unclear).
    lower_exponent: float | None = None

    @property
    def y_range(self) -> tuple[float, float]:
        if np.isfinite(self.lo):
            return 0.0, 1.0
        if np.isfinite(self.hi):
            return -1.0, 0.0
        return -1.0, 1.0

    # For [lo, inf): z = y**power, 1 - w = (1 - z)**tail_power, t = lo + c*w/(1 - w).
    # A tail f ~ t**-p with 1 < p < 2 becomes a smooth integrand with
    # tail_power = 1/(p - 1), as the lower power does for a pole.
    def _lower_w(self, y):
        z = y ** self.power if self.power != 1.0 else y
        if self.tail_power == 1.0:
            return z, 1.0 - z
        rest = (1.0 - z) ** self.tail_power
        return 1.0 - rest, rest

    def to_t(self, y):
        y = np.asarray(y, dtype=float)
        c = self.scale
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            if self.log_span > 0:
                z = y ** self.power if self.power != 1.0 else y
                return np.minimum(self.lo + c * np.expm1(z * self.log_span), self.hi)
            if np.isfinite(self.lo):
                if np.isfinite(self.hi):
                    w = y ** self.power if self.power != 1.0 else y
                    return self.lo + (self.hi - self.lo) * w
                w, rest = self._lower_w(y)
                return self.lo + c * w / rest
            if np.isfinite(self.hi):
                return self.hi + c * y / (1.0 + y)
            return self.centre + c * y / (1.0 - y * y)

    def dt_dy(self, y):
        y = np.asarray(y, dtype=float)
        c = self.scale
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            if self.log_span > 0:
                p = self.power
                z = y**p if p != 1.0 else y
                dz = p * y ** (p - 1.0) if p != 1.0 else np.ones_like(y)
                return c * self.log_span * np.exp(z * self.log_span) * dz
            if np.isfinite(self.lo):
                p = self.power
                z = y**p if p != 1.0 else y
                dz = p * y ** (p - 1.0) if p != 1.0 else np.ones_like(y)
                if np.isfinite(self.hi):
                    return (self.hi - self.lo) * dz
                q = self.tail_power
                rest = (1.0 - z) ** q if q != 1.0 else 1.0 - z
                dw = q * (1.0 - z) ** (q - 1.0) * dz if q != 1.0 else dz
                return c / rest**2 * dw
            if np.isfinite(self.hi):
                return c / (1.0 + y) ** 2
            return c * (1.0 + y * y) / (1.0 - y * y) ** 2

    def to_y(self, t):
        t = np.asarray(t, dtype=float)
        c = self.scale
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            if self.log_span > 0:
                z = np.clip(np.log1p(np.maximum(t - self.lo, 0.0) / c) / self.log_span, 0.0, 1.0)
                return z ** (1.0 / self.power) if self.power != 1.0 else z
            if np.isfinite(self.lo):
                if np.isfinite(self.hi):
                    z = np.clip((t - self.lo) / (self.hi - self.lo), 0.0, 1.0)
                else:
                    s = np.maximum(t - self.lo, 0.0) / c
                    # 1 - w = 1/(1 + s); z = 1 - (1 - w)**(1/q), without cancellation (for q = 1 that is
                    # s/(1 + s), two roundings as the general form has, at half its cost)
                    if self.tail_power == 1.0:
                        z = np.where(np.isinf(s), 1.0, s / (1.0 + s))
                    else:
                        z = np.where(np.isinf(s), 1.0, -np.expm1(-np.log1p(s) / self.tail_power))
                return z ** (1.0 / self.power) if self.power != 1.0 else z
            if np.isfinite(self.hi):
                s = np.minimum(t - self.hi, 0.0) / c
                return np.where(np.isinf(s), -1.0, s / (1.0 - s))
            s = (t - self.centre) / c
            y = 2.0 * s / (1.0 + np.sqrt(1.0 + 4.0 * s * s))
            return np.where(np.isinf(s), np.sign(s), y)


def upper_tail_power(g: Callable, lo: float, scale: float) -> float:
    """tail_power 1/(p - 1) for a heavy tail g(t) ~ t**-p with 1 < p < 2 (else 1)."""
    t = lo + scale * np.array([1e7, 1e9])
    with np.errstate(all="ignore"):
        v = np.asarray(g(t), dtype=float)
    if not (np.all(np.isfinite(v)) and np.all(v > 0)):
        return 1.0
    p = -float(np.log(v[1] / v[0]) / np.log((t[1] - lo) / (t[0] - lo)))
    snapped = round(p * 1000) / 1000      # round exponents, as for the lower end
    p = snapped if abs(p - snapped) < 1e-5 else p
    if not np.isfinite(p) or p >= 1.99 or p <= 1.0:
        return 1.0
    return float(np.clip(1.0 / (p - 1.0), 1.0, 20.0))


def lower_end_exponent(g: Callable, lo: float, width: float) -> float | None:
    """alpha for g(t) ~ (t - lo)**alpha near a finite lower end (None if unclear).

    alpha is read off the log-log slope of g at two ages just above lo.
    """
    if not np.isfinite(lo) or not width > 0:
        return None
    d = width * np.array([1e-15, 1e-13])
    with np.errstate(all="ignore"):
        v = np.asarray(g(lo + d), dtype=float)
    if not (np.all(np.isfinite(v)) and np.all(v > 0)):
        return None
    alpha = float(np.log(v[1] / v[0]) / np.log(d[1] / d[0]))
    if not np.isfinite(alpha):
        return None
    # Lower-order terms bias the slope slightly (a constant beside t**-0.5 moves
    # it by ~1e-7); exponents that users type are round, so snap to 1/1000 when close.
    snapped = round(alpha * 1000) / 1000
    return snapped if abs(alpha - snapped) < 1e-5 else alpha


def lower_end_power(g: Callable, lo: float, width: float) -> float:
    """The map power 1/(alpha + 1) for a pole g(t) ~ (t - lo)**alpha, -1 < alpha < 0."""
    return pole_power(lower_end_exponent(g, lo, width))


def pole_power(alpha: float | None) -> float:
    """The map power 1/(alpha + 1) for a pole of exponent alpha (-1 < alpha < 0), else 1."""
    if alpha is None or alpha <= -0.98 or alpha > -0.01:
        # Only poles get the map: for alpha >= 0 it would turn the smooth
        # corrections of the integrand into fractional powers (a Gauss-Jacobi
        # rule on the first piece handles those instead).
        return 1.0
    return float(np.clip(1.0 / (alpha + 1.0), 1.0, 50.0))


def divergence_reason(g: Callable, lo: float, hi: float) -> str | None:
    """Why the integral of g >= 0 over (lo, hi) is infinite, or None if no sign of it.

    A quadrature on a compressed map returns a finite number for any integrand, so the
    ends are examined directly. At an infinite end the mass per unit of log-age,
    |t| g(t), must tend to 0 for the integral to converge (comparison with the
    integral of 1/t; e.g. Apostol, Calculus I, 10.21); if it is still not falling
    across t = 1e240, 1e270, 1e300 the area is infinite. At a finite end, a pole
    g ~ (t - lo)**alpha with alpha <= -1 is not integrable (same comparison).
    """
    far = np.array([1e240, 1e270, 1e300])
    ends = []
    if np.isinf(hi):
        ends.append(("upper", (0.0 if np.isinf(lo) else lo) + far))
    if np.isinf(lo):
        ends.append(("lower", (0.0 if np.isinf(hi) else hi) - far))
    for side, t in ends:
        with np.errstate(all="ignore"):
            w = np.abs(t) * np.asarray(g(t), dtype=float) * np.ones_like(t)
        if np.all(np.isfinite(w)) and w[-1] > 0 and w[2] >= 0.999 * w[1] and w[1] >= 0.999 * w[0]:
            return (f"the area under it is infinite: toward the {side} end (t = {t[-1]:.3g}) the density "
                    f"does not fall faster than 1/t (t·f(t) = {w[-1]:.3g} and not decreasing), so no "
                    "normalising constant exists; give the formula a decaying tail or a finite support")
    if np.isfinite(lo):
        width = (hi - lo) if np.isfinite(hi) else 1.0
        alpha = lower_end_exponent(g, lo, width)
        if alpha is not None and alpha <= -1.0 + 1e-6:
            return (f"the area under it is infinite: near the lower end t = {lo:g} it grows like "
                    f"(t - {lo:g})^{alpha:.3g}, a pole that is not integrable (the exponent must exceed -1)")
    return None


# The logarithmic probe grid of ``support_map`` (offsets from a finite end, or from 0 both ways).
_SCALE_OFFSETS = np.logspace(-8, 12, 241)
_SCALE_OFFSETS.setflags(write=False)


def support_map(lo: float, hi: float, density: Callable | None = None) -> SupportMap:
    """Choose a map for (lo, hi); for infinite ends, probe ``density`` for its scale.

    The scale is where t*f(t) (the mass per unit of log-age) peaks on a
    logarithmic probe grid, so the map spends its resolution where the mass is.
    """
    centre, scale = 0.0, 1.0
    if not (np.isfinite(lo) and np.isfinite(hi)) and density is not None:
        offsets = _SCALE_OFFSETS
        if np.isfinite(lo):
            probe, base = lo + offsets, lo
        elif np.isfinite(hi):
            probe, base = hi - offsets, hi
        else:
            probe = np.concatenate([-offsets[::-1], [0.0], offsets])
            base = None
        with np.errstate(all="ignore"):
            values = np.asarray(density(probe), dtype=float)
        values = np.where(np.isfinite(values), values, 0.0)
        if base is not None:
            weight = values * offsets
            if np.any(weight > 0):
                scale = float(offsets[int(np.argmax(weight))])
        else:
            if np.any(values > 0):
                k = int(np.argmax(values))
                centre = float(probe[k])
                positive = probe[values > values[k] * 1e-3]
                scale = float(max(np.ptp(positive) / 4.0, 1e-8 * max(1.0, abs(centre))))
    power, tail, alpha = 1.0, 1.0, None
    if density is not None and np.isfinite(lo):
        width = (hi - lo) if np.isfinite(hi) else scale
        alpha = lower_end_exponent(density, lo, width)
        power = pole_power(alpha)
        if not np.isfinite(hi):
            tail = upper_tail_power(density, lo, scale)
    return SupportMap(float(lo), float(hi), centre, scale, power, tail, lower_exponent=alpha)


def log_age_map(lo: float, hi: float, scale: float, density: Callable | None = None) -> SupportMap:
    """The log-age map of a finite [lo, hi] that spans many decades above ``scale``.

    Equal steps in y are equal steps in ln(1 + (t - lo)/scale), so an integrand
    like c/t (a cumulative hazard growing like log t, e.g. the Lomax hazard)
    becomes a constant, and a pole at lo keeps its y**power treatment.
    """
    if not (np.isfinite(lo) and np.isfinite(hi) and hi > lo and scale > 0):
        raise ValueError("log_age_map needs a finite interval and a positive scale")
    alpha = lower_end_exponent(density, lo, scale) if density is not None else None
    span = float(np.log1p((hi - lo) / scale))
    return SupportMap(float(lo), float(hi), 0.0, float(scale), pole_power(alpha), 1.0, span, lower_exponent=alpha)


class CumulativeIntegral:
    """G(t) = integral of g from the lower end of the support to t, to ~1e-14.

    Setup partitions the mapped y-interval adaptively until the 10-point
    Gauss-Legendre value of each piece agrees with the sum over its two halves
    within ``rtol`` relative to the piece itself (so G keeps its relative
    accuracy where G is small), plus an absolute floor of 1e-17 of the total,
    which is what limits accuracy next to an integrable pole. After
    setup, G(t) for a vector t costs one 10-point rule per element.

    ``check`` is called on every batch of integrand values, so a model can
    reject negative or non-finite values with its own message.
    """

    max_pieces = 40_000

    def __init__(self, integrand: Callable, mapping: SupportMap, *, rtol: float = 1e-13,
                 field: str = "formula", check: Callable | None = None,
                 breakpoints=(), upper_sums: bool = True, map_of_integrand: bool = False):
        self.integrand = integrand
        # False where only integrals from the lower end are asked for (a cumulative hazard): the
        # series then makes no cuts for the digits of the mass above t (``upper`` stays right, slower).
        self.upper_sums = upper_sums
        self.mapping = mapping
        self.field = field
        self._check = check
        ylo, yhi = mapping.y_range
        self._ylo = ylo
        self._jacobi = None
        if np.isfinite(mapping.lo) and mapping.power == 1.0:
            far = np.isfinite(mapping.hi) and mapping.log_span == 0.0
            width = (mapping.hi - mapping.lo) if far else mapping.scale
            # ``map_of_integrand``: the map was chosen for this very integrand (support_map or
            # log_age_map with it as the density), which measured its exponent at these ages already.
            alpha = (mapping.lower_exponent if map_of_integrand
                     else lower_end_exponent(integrand, mapping.lo, width))
            if alpha is not None and alpha > 0 and abs(alpha - round(alpha)) > 1e-9:
                self._jacobi = _jacobi_rule(alpha)
        inner = [float(mapping.to_y(b)) for b in breakpoints
                 if np.isfinite(b) and mapping.lo < b < mapping.hi]
        grid = np.linspace(ylo, yhi, 65)
        if inner:
            grid = np.unique(np.concatenate([grid, inner]))
        self.edges, self.pieces = self._partition(grid, rtol)
        self._check = None   # values were vetted during set-up; evaluation needs no checks
        self.cumulative = np.concatenate([[0.0], np.cumsum(self.pieces)])
        self.total = float(self.cumulative[-1])
        # Mass after each piece, summed from the top so the far tail keeps its digits.
        self._after = np.concatenate([np.cumsum(self.pieces[::-1])[::-1][1:], [0.0]])
        self._floor = 1e-17 * float(np.sum(np.abs(self.pieces)))
        self._series: PieceSeries | None = None

    def series(self) -> PieceSeries:
        """The Chebyshev series of each piece (engine/piece_series.py), built on first use: a
        value of G then costs a short sum instead of a 10-point rule, where the series is resolved.
        Pieces whose series is not resolved, or whose small masses near an end would drown in the
        rounding of the sum, are cut once more (PieceSeries.build)."""
        if self._series is None:
            with np.errstate(all="ignore"):
                series = PieceSeries.build(self.edges, self.pieces, self.cumulative[:-1], self._after,
                                           self._g_of_y, self._rule, first_end=np.isfinite(self.mapping.lo),
                                           upper_sums=self.upper_sums, nodes_and_quadrature=self._nodes_and_rule)
            self._series = series
        return self._series

    def _g_of_y(self, y):
        t = self.mapping.to_t(y)
        with np.errstate(all="ignore"):
            g = np.asarray(self.integrand(t), dtype=float)
            if g.shape != t.shape:                 # an integrand that does not depend on t
                g = g * np.ones_like(t)
            far = np.isinf(t)
            if not far.any():                      # the common case: no node at an infinite end
                if self._check is not None:
                    self._check(t, g)
                return g * self.mapping.dt_dy(y)
            if self._check is not None:
                self._check(t[~far], g[~far])
            # A node that rounds onto an infinite end carries no mass (integrability).
            return np.where(far, 0.0, g * self.mapping.dt_dy(y))

    def _rule(self, a, b, extra=None):
        """Integrals over each [a_i, b_i]: 10-point Gauss-Legendre, or Gauss-Jacobi
        with weight (y - ylo)**alpha on a piece that starts at a fractional-power zero. The integrand
        at the ages ``extra`` (any shape), if given, comes from the same pass and is returned too."""
        a = np.asarray(a, dtype=float)
        b = np.asarray(b, dtype=float)
        half = 0.5 * (b - a)
        mid = 0.5 * (b + a)
        y = mid[:, None] + half[:, None] * _GL_NODES[None, :]
        first = a <= self._ylo if self._jacobi is not None else None
        jacobi = first is not None and bool(np.any(first))
        # The Gauss-Jacobi nodes of the pieces at the lower end (and any extra ages) go through the
        # integrand in the same pass as the Gauss-Legendre nodes of all pieces.
        parts = [y.ravel()]
        if jacobi:
            nodes, weights, alpha = self._jacobi
            width = b[first] - self._ylo
            ys = self._ylo + width[:, None] * nodes[None, :]
            parts.append(ys.ravel())
        if extra is not None:
            parts.append(np.ravel(extra))
        values = self._g_of_y(np.concatenate(parts) if len(parts) > 1 else parts[0])
        out = half * (values[:y.size].reshape(y.shape) @ _GL_WEIGHTS)
        if jacobi:
            phi = values[y.size:y.size + ys.size].reshape(ys.shape) / (ys - self._ylo) ** alpha
            out[first] = width ** (alpha + 1.0) * (phi @ weights)
        if extra is None:
            return out
        return out, values[values.size - np.size(extra):].reshape(np.shape(extra))

    def _nodes_and_rule(self, a, b):
        """The integrand at the series' nodes of each piece [a_i, b_i] and the pieces' integrals
        (``_rule``), in one pass over the integrand."""
        out, values = self._rule(a, b, PieceSeries.nodes(a, b))
        return values, out

    def _partition(self, grid, rtol):
        done_a, done_b, done_val = [], [], []
        a, b = grid[:-1], grid[1:]
        # A piece's integral on the whole piece is known from the round before (its half then) or not
        # yet (NaN: the first round's pieces and the parts of a graded split): those are integrated in
        # the same pass as both halves of every piece, one pass over the integrand per round.
        whole = np.full(a.size, np.nan)
        scale_hint = 0.0
        rounds = 0
        while a.size:
            rounds += 1
            m = 0.5 * (a + b)
            unknown = np.flatnonzero(np.isnan(whole))
            values = self._rule(np.concatenate([a, m, a[unknown]]), np.concatenate([m, b, b[unknown]]))
            left, right = values[:a.size], values[a.size:2 * a.size]
            whole[unknown] = values[2 * a.size:]
            if rounds == 1:
                scale_hint = float(np.sum(np.abs(whole)))
            halves = left + right
            if not np.all(np.isfinite(halves)):
                raise ModelError(self.field, "the integral is not finite (a non-integrable "
                                 "singularity or an overflow in the formula)")
            scale_hint = max(scale_hint, float(np.sum(np.abs(halves))))
            err = np.abs(whole - halves)
            # Relative to the running total (accuracy of G where G is small),
            # with an absolute floor that stops the refinement at a pole.
            floor = 1e-17 * scale_hint
            ok = (err <= rtol * np.abs(halves) + floor) | (np.abs(b - a) <= 1e-15 * np.maximum(np.abs(a), 1e-300))
            done_a.append(a[ok]); done_b.append(b[ok]); done_val.append(halves[ok])
            keep = ~ok
            a_new = np.concatenate([a[keep], m[keep]])
            b_new = np.concatenate([m[keep], b[keep]])
            whole = np.concatenate([left[keep], right[keep]])
            if (rounds > 1 or self._jacobi is None) and np.isfinite(self.mapping.lo):
                # The piece at a finite lower end failing again (or at once, where no Gauss-Jacobi rule
                # takes its leading power): the integrand is not smooth there (a power of the age, or
                # a constant plus one), and halving it would take a round per binary digit. Split it
                # geometrically instead, towards the end, as quadrature near an end singularity does
                # (Davis & Rabinowitz 2nd ed., 2.12.7 on graded meshes).
                first = np.flatnonzero(a_new == self._ylo)
                if first.size:
                    i = int(first[0])
                    cuts = a_new[i] + (b_new[i] - a_new[i]) * 2.0 ** -np.arange(GRADED_STEPS, 0, -1)
                    starts, ends = np.concatenate([[a_new[i]], cuts]), np.concatenate([cuts, [b_new[i]]])
                    a_new = np.concatenate([np.delete(a_new, i), starts])
                    b_new = np.concatenate([np.delete(b_new, i), ends])
                    whole = np.concatenate([np.delete(whole, i), np.full(starts.size, np.nan)])
            a, b = a_new, b_new
            pieces = sum(x.size for x in done_a) + a.size
            if pieces > self.max_pieces or rounds > 2000:
                where = self.mapping.to_t(np.array([a.min(), b.max()]))
                raise ModelError(self.field, "the integral does not converge between "
                                 f"t={where[0]:.6g} and t={where[1]:.6g} (a tail too heavy "
                                 "to integrate, a non-integrable singularity, or wild oscillation)")
        a = np.concatenate(done_a); b = np.concatenate(done_b); v = np.concatenate(done_val)
        order = np.argsort(a)
        a, b, v = a[order], b[order], v[order]
        edges = np.concatenate([a, b[-1:]])
        return edges, v

    def _partial(self, a, b):
        with np.errstate(all="ignore"):
            value = self._rule(a, np.maximum(a, b))
        return np.where(b > a, value, 0.0)

    def _piece_sums(self, y, upper):
        """The mass below (or above, where ``upper``: one flag or one per point) y: from the series
        where that is trusted, else the mass before (after) y's piece plus the 10-point rule on the
        part of the piece below (above) y, all such points in one pass."""
        value, trusted = self.series().sums(y, upper)
        if trusted.all():
            return value
        # Points at or beyond the ends are answered by the callers (0 or the total).
        rest = np.flatnonzero(~trusted)
        rest = rest[(y[rest] > self.edges[0]) & (y[rest] < self.edges[-1])]
        if rest.size:
            yr = y[rest]
            kr = np.minimum(np.maximum(np.searchsorted(self.edges, yr, side="right") - 1, 0), self.pieces.size - 1)
            up = upper[rest] if np.ndim(upper) else np.full(rest.size, bool(upper))
            # Above y in the first piece of a fractional power at the start: the piece's mass less the
            # part below y, which the Gauss-Jacobi rule integrates (a Gauss-Legendre rule from y up
            # would miss the power's digits, about 1e-11 of the piece).
            from_start = up & (kr == 0) if self._jacobi is not None else np.zeros(up.shape, dtype=bool)
            lower = ~up | from_start
            start = np.where(lower, self.edges[kr], np.maximum(yr, self.edges[kr]))
            end = np.where(lower, np.minimum(yr, self.edges[kr + 1]), self.edges[kr + 1])
            part = self._partial(start, end)
            value[rest] = np.where(from_start, self._after[kr] + (self.pieces[kr] - part),
                                   np.where(up, self._after[kr], self.cumulative[kr]) + part)
        return value

    def __call__(self, t):
        """G(t), vectorised, clipped to [0, total] outside the support."""
        t = np.asarray(t, dtype=float)
        y = self.mapping.to_y(t).ravel()
        value = self._piece_sums(y, upper=False)
        value[y >= self.edges[-1]] = self.total
        value[y <= self.edges[0]] = 0.0
        return value.reshape(t.shape)

    def upper(self, t):
        """Integral from t to the upper end, without cancellation in the tail."""
        t = np.asarray(t, dtype=float)
        y = self.mapping.to_y(t).ravel()
        value = self._piece_sums(y, upper=True)
        value[y >= self.edges[-1]] = 0.0
        value[y <= self.edges[0]] = self.total
        return value.reshape(t.shape)

    def sided(self, t, upper):
        """The integral below t where ``upper`` is False and above t where it is True, in one pass
        (each point on the side that keeps its digits: ``upper`` near the end, below it near the start)."""
        t = np.asarray(t, dtype=float)
        upper = np.asarray(upper, dtype=bool)
        upper = (upper if upper.shape == t.shape else np.broadcast_to(upper, t.shape)).ravel()
        y = self.mapping.to_y(t).ravel()
        value = self._piece_sums(y, upper)
        # At or beyond the ends: 0 or the total, on each point's side (only those few points are touched).
        ends = np.flatnonzero((y >= self.edges[-1]) | (y <= self.edges[0]))
        if ends.size:
            top, side = y[ends] >= self.edges[-1], upper[ends]
            value[ends] = np.where(top, np.where(side, 0.0, self.total), np.where(side, self.total, 0.0))
        return value.reshape(t.shape)


def invert_monotone(cdf: Callable, sf: Callable, u, mapping: SupportMap, pdf: Callable | None = None,
                    *, upper_tail: bool = False):
    """Solve cdf(t) = u elementwise for a continuous, non-decreasing cdf.

    With ``upper_tail=True`` the input is v = 1 - u and sf(t) = v is solved, so
    tiny upper-tail probabilities keep all their digits. Brackets come from a
    fixed grid in the mapped coordinate; a safeguarded Newton iteration
    (bisection whenever a step leaves the bracket; secant steps when no density
    is given) polishes each root. For u > 1/2 the equation sf(t) = 1 - u is
    solved instead, keeping the digits of the upper tail.
    """
    p = np.asarray(u, dtype=float)
    shape = p.shape
    p = p.ravel()
    out = np.full(p.shape, np.nan)
    lo, hi = mapping.lo, mapping.hi
    first, last = (hi, lo) if upper_tail else (lo, hi)
    out[p <= 0] = first
    out[p >= 1] = last
    inside = (p > 0) & (p < 1)
    if not np.any(inside):
        return out.reshape(shape)
    pp = p[inside]
    t_grid, c_grid = bracket_grid(cdf, mapping)
    if upper_tail:
        s_grid = np.minimum.accumulate(np.clip(np.asarray(sf(t_grid), dtype=float), 0.0, 1.0))
        # sf decreases: bracket on its reversed, increasing copy.
        k = t_grid.size - np.searchsorted(s_grid[::-1], pp, side="left")
        upper = np.ones(pp.size, dtype=bool)
        goal = pp
    else:
        k = np.searchsorted(c_grid, pp, side="left")
        upper = pp > 0.5
        goal = np.where(upper, 1.0 - pp, pp)
    below = k <= 0
    above = k >= t_grid.size
    k = np.clip(k, 1, t_grid.size - 1)
    a, b = t_grid[k - 1].copy(), t_grid[k].copy()
    if np.any(above) and not np.isfinite(hi):
        # Heavy tails reach beyond the grid: extend the bracket geometrically.
        far = np.flatnonzero(above)
        a[far] = t_grid[-1]
        b[far] = t_grid[-1]
        for _ in range(200):
            with np.errstate(all="ignore"):
                left = np.where(upper[far], sf(b[far]) > goal[far], cdf(b[far]) < goal[far])
            if not left.any():
                break
            move = far[left]
            a[move] = b[move]
            b[move] = np.where(b[move] > 0, b[move] * 16.0, np.abs(b[move]) + 1.0)
            if np.all(np.isinf(b[move])):
                break
        above = above & ~np.isfinite(b)
    x = _polish(cdf, sf, pdf, upper, goal, a, b)
    x = np.where(below, t_grid[0], x)
    x = np.where(above, t_grid[-1] if not np.isfinite(hi) else hi, x)
    out[inside] = x
    return out.reshape(shape)


def bracket_grid(cdf, mapping: SupportMap):
    """A grid of ages over the support (``mapped_grid``) and the cdf on it, made non-decreasing."""
    t_grid = mapped_grid(mapping)
    c_grid = np.maximum.accumulate(np.clip(np.asarray(cdf(t_grid), dtype=float), 0.0, 1.0))
    return t_grid, c_grid


# Fractions of the mapped coordinate's range for ``mapped_grid``: dense near the ends of the y-range,
# where infinite supports are compressed.
_GRID_STEPS = np.concatenate([2.0 ** -np.arange(60, 6, -1), np.linspace(2.0**-6, 1 - 2.0**-6, 120),
                              1 - 2.0 ** -np.arange(7, 61)])
_GRID_STEPS.setflags(write=False)


def mapped_grid(mapping: SupportMap) -> np.ndarray:
    """Ages at equal steps of the mapped coordinate, geometrically denser towards its ends (down to
    2^-60 of its range), with the finite ends of the support themselves."""
    ylo, yhi = mapping.y_range
    span = yhi - ylo
    t_grid = np.unique(mapping.to_t(ylo + span * _GRID_STEPS))
    t_grid = t_grid[np.isfinite(t_grid)]
    lo, hi = mapping.lo, mapping.hi
    if np.isfinite(lo):
        t_grid = np.concatenate([[lo], t_grid[t_grid > lo]])
    if np.isfinite(hi):
        t_grid = np.concatenate([t_grid[t_grid < hi], [hi]])
    return t_grid


def _polish(cdf, sf, pdf, upper, goal, a, b, max_iter: int = 80):
    """Safeguarded Newton/secant on g(x) = F(x) - goal, or goal - R(x) where ``upper``."""

    def g(x, up, gl):
        with np.errstate(all="ignore"):
            return np.where(up, gl - sf(x), cdf(x) - gl)

    ga, gb = g(a, upper, goal), g(b, upper, goal)
    with np.errstate(all="ignore"):
        frac = np.clip(-ga / (gb - ga), 0.05, 0.95)
    frac = np.where(np.isfinite(frac), frac, 0.5)
    x = a + (b - a) * frac
    result = x.copy()
    active = np.arange(goal.size)
    eps = np.finfo(float).eps
    for it in range(max_iter):
        xa, aa, bb, up, gl = x, a[active], b[active], upper[active], goal[active]
        gx = g(xa, up, gl)
        left = gx <= 0
        aa = np.where(left, xa, aa)
        bb = np.where(left, bb, xa)
        ga_new = np.where(left, gx, ga[active])
        gb_new = np.where(left, gb[active], gx)
        done = (np.abs(gx) <= 2 * eps * gl) | (bb - aa <= 4 * eps * np.maximum(np.abs(xa), 1e-300))
        if pdf is not None and it % 4 != 3:
            with np.errstate(all="ignore"):
                step = gx / np.asarray(pdf(xa), dtype=float)
            xn = xa - step
        else:
            with np.errstate(all="ignore"):
                xn = aa - ga_new * (bb - aa) / (gb_new - ga_new)
            if it % 4 == 3:
                xn = 0.5 * (aa + bb)
        bad = ~np.isfinite(xn) | (xn <= aa) | (xn >= bb)
        xn = np.where(bad, 0.5 * (aa + bb), xn)
        result[active] = xa
        a[active], b[active] = aa, bb
        ga[active], gb[active] = ga_new, gb_new
        keep = ~done
        if not keep.any():
            break
        active = active[keep]
        x = xn[keep]
    return result


