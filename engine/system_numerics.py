"""Numerics shared by the system structures: products and Poisson-binomial counts of part
probabilities, a vectorised globally adaptive quadrature, and the mean as an integral of R.

Poisson-binomial recursion: Barlow & Heidtmann (1984), IEEE Trans. Reliability R-33(4),
322-323; adaptive quadrature in the manner of QUADPACK's QAG (Piessens et al. 1983).
"""
from __future__ import annotations

import math

import numpy as np
from scipy import special

from .system_parts import Block

# Accuracy asked of the convolution integrals, relative to each value.
EPSREL = 1e-10


def log_of(x, complement):
    """log(x) computed from whichever of x and 1 - x is known more precisely."""
    with np.errstate(divide="ignore"):
        return np.where(x < 0.5, np.log(x), np.log1p(-complement))


def prod_others(values: np.ndarray) -> np.ndarray:
    """Row i = product of all rows except i (prefix and suffix products, no division)."""
    m = values.shape[0]
    before = np.ones_like(values)
    after = np.ones_like(values)
    for i in range(1, m):
        before[i] = before[i - 1] * values[i - 1]
        after[m - 1 - i] = after[m - i] * values[m - i]
    return before * after


def working_counts(sfs: np.ndarray, cdfs: np.ndarray) -> np.ndarray:
    """Row j = P(exactly j parts work) for independent parts (Barlow & Heidtmann 1984)."""
    n = sfs.shape[0]
    counts = np.zeros((n + 1,) + sfs.shape[1:])
    counts[0] = 1.0
    for i in range(n):                               # loop over parts, not samples
        counts[1:i + 2] = counts[1:i + 2] * cdfs[i] + counts[0:i + 1] * sfs[i]
        counts[0] = counts[0] * cdfs[i]
    return counts


def binomial_split(sf, cdf, n, k):
    """(sum_{i>=k}, sum_{i<k}) of C(n,i) R^i F^(n-i): e-Handbook 8.1.8.4, both tails in logs."""
    i = np.arange(n + 1)[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        log_terms = (special.gammaln(n + 1) - special.gammaln(i + 1) - special.gammaln(n - i + 1)
                     + special.xlogy(i, sf[None, :]) + special.xlogy(n - i, cdf[None, :]))
    terms = np.exp(log_terms)
    return terms[k:].sum(axis=0), terms[:k].sum(axis=0)


_GAUSS_X, _GAUSS_W = np.polynomial.legendre.leggauss(8)


def adaptive_integral(integrand, problems: int, rows: int, epsrel: float = EPSREL,
                       max_rounds: int = 80, max_open: int = 1 << 17) -> np.ndarray:
    """integral_0^1 integrand(p, w) dw for problems p = 0..problems-1, each row to ``epsrel``.

    Globally adaptive bisection in the manner of QUADPACK's QAG (Piessens et al. 1983),
    vectorised over every open interval of every problem: an interval's value is 8-point
    Gauss-Legendre on its two halves, its error the difference from the rule on the
    whole; while a problem's summed error exceeds epsrel x |value| (or rounding level),
    its intervals with the largest errors are halved. One numpy call per round, so
    integrals nested in the integrand (standby of three or more parts) stay vectorised.
    ``max_open`` (or 8 per problem) caps the work: beyond it intervals are accepted as they stand.
    """
    def rule(pid, a, b):
        half = 0.5 * (b - a)
        w = (a + half)[:, None] + half[:, None] * _GAUSS_X[None, :]
        values = integrand(np.repeat(pid, _GAUSS_X.size), w.ravel()).reshape(rows, pid.size, _GAUSS_X.size)
        values = np.where(np.isfinite(values), values, 0.0)
        return (np.einsum("rik,k->ri", values, _GAUSS_W) * half,
                np.einsum("rik,k->ri", np.abs(values), _GAUSS_W) * half)

    def refine(pid, a, b, whole):
        """Value, error, halves and magnitude of each interval whose whole-rule value is known."""
        m = 0.5 * (a + b)
        both, size = rule(np.concatenate([pid, pid]), np.concatenate([a, m]), np.concatenate([m, b]))
        k = pid.size
        left, right = both[:, :k], both[:, k:]
        return left + right, np.abs(left + right - whole), left, right, size[:, :k] + size[:, k:]

    def per_problem(values, pid, how=np.add):
        out = np.zeros(values.shape[:-1] + (problems,))
        how.at(out.T, pid, values.T)
        return out

    pid = np.arange(problems)
    a, b = np.zeros(problems), np.ones(problems)
    val, err, left, right, mag = refine(pid, a, b, rule(pid, a, b)[0])
    done = np.zeros((rows, problems))
    for round_ in range(max_rounds):
        if pid.size == 0:
            break
        tol = np.maximum(epsrel * np.abs(per_problem(val, pid)), 64 * np.finfo(float).eps * per_problem(mag, pid))
        ratio = np.max(err / np.where(tol > 0, tol, np.finfo(float).tiny)[:, pid], axis=0)
        finished = per_problem(ratio, pid) <= 1.0
        if round_ == max_rounds - 1 or pid.size > max(max_open, 8 * problems):
            finished[:] = True
        closing = finished[pid]
        done += per_problem(val[:, closing], pid[closing])
        peak = per_problem(ratio, pid, np.maximum)
        split = ~closing & (ratio >= 0.25 * peak[pid])
        stay = ~closing & ~split
        m = 0.5 * (a[split] + b[split])
        halves = refine(np.concatenate([pid[split], pid[split]]), np.concatenate([a[split], m]),
                        np.concatenate([m, b[split]]), np.concatenate([left[:, split], right[:, split]], axis=1))
        pid = np.concatenate([pid[stay], pid[split], pid[split]])
        a = np.concatenate([a[stay], a[split], m])
        b = np.concatenate([b[stay], m, b[split]])
        val, err, left, right, mag = (np.concatenate([old[:, stay], new], axis=1)
                                      for old, new in zip((val, err, left, right, mag), halves))
    return done


def mean_by_integration(block: Block) -> float:
    """E[T] = start + integral_start^inf R(t) dt - integral_-inf^start F(t) dt (the last
    term only when lives can fall below ``start``), split at the leaves' quantiles."""
    lo, hi = block.support
    if tail_too_heavy(block):
        return math.inf
    pts = block._scale_points()
    start = lo if np.isfinite(lo) else min(0.0, float(pts.min()) if pts.size else 0.0)
    inner = pts[(pts > start) & (pts < hi)]
    edges = np.unique(np.concatenate([[start], inner, [hi] if np.isfinite(hi) else []]))
    a, b = edges[:-1], edges[1:]
    spread = max(float(edges[-1] - start), 1.0)
    total = start + integral_of(lambda t: block._sf_cdf(t)[0], a, b, tail_from=None if np.isfinite(hi) else edges[-1],
                                 tail_scale=spread)
    if not np.isfinite(lo):
        total -= integral_of(lambda t: block._sf_cdf(t)[1], np.empty(0), np.empty(0), tail_from=start,
                              tail_scale=-spread)
    return float(total)


def integral_of(fn, a, b, tail_from=None, tail_scale=1.0) -> float:
    """Sum of integral_a^b fn over the pieces, plus the integral from ``tail_from`` to +inf
    (or -inf when ``tail_scale`` < 0) mapped to [0, 1) by t = tail_from + c w / (1 - w)."""
    pieces = a.size
    problems = pieces + (tail_from is not None)
    if problems == 0:
        return 0.0
    a_all = np.concatenate([a, [tail_from if tail_from is not None else 0.0]])
    b_all = np.concatenate([b, [0.0]])

    def integrand(pid, w):
        tail = pid >= pieces
        width = np.where(tail, 0.0, b_all[pid] - a_all[pid])
        with np.errstate(divide="ignore", invalid="ignore"):
            t = np.where(tail, a_all[pid] + tail_scale * w / (1.0 - w), a_all[pid] + width * w)
            jacobian = np.where(tail, abs(tail_scale) / (1.0 - w) ** 2, width)
            return (fn(t) * jacobian)[None, :]
    return float(np.sum(adaptive_integral(integrand, problems, 1, epsrel=1e-11)))


def tail_too_heavy(block: Block) -> bool:
    """Is t R(t) not going to 0 at the far end? (then the mean diverges)"""
    lo, hi = block.support
    if np.isfinite(hi):
        return False
    pts = block._scale_points()
    scale = max(1.0, float(np.max(np.abs(pts))) if pts.size else 1.0)
    big = scale * np.array([1e6, 1e9, 1e12])
    weighted = big * block._sf_cdf(big)[0]
    return bool(weighted[-1] > 1e-9 and weighted[-1] >= 0.5 * weighted[0])


def plain_spec(value):
    """A spec with infinities made JSON-safe, for comparing parts."""
    if isinstance(value, float) and not math.isfinite(value):
        return repr(value)
    if isinstance(value, dict):
        return {k: plain_spec(v) for k, v in value.items() if k != "name"}
    if isinstance(value, (list, tuple)):
        return [plain_spec(v) for v in value]
    return value
