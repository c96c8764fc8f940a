"""Fit a textbook lifetime family to failure and suspension times by censored maximum likelihood.

Follows Meeker & Escobar, Statistical Methods for Reliability Data (1998), ch. 7-8,
and the NIST/SEMATECH e-Handbook of Statistical Methods, sections 8.4.1.2-8.4.1.3.
"""
from __future__ import annotations

import math
import warnings

import numpy as np
from scipy import optimize, special

from .errors import ModelError, censoring_flags, finite_number
from .families import FAMILIES, Family, FamilyTarget

__all__ = ["fit_family"]

METHOD = "censored maximum likelihood"


# ---- log-survival of the standardised families, precise in the far tail -----------------
def _gamma_logsf(z, p):
    k = p["shape"]
    with np.errstate(divide="ignore"):
        out = np.log(special.gammaincc(k, z))
    deep = ~np.isfinite(out)
    if np.any(deep):
        zd = z[deep]
        # Upper incomplete gamma for large z: Gamma(k, z) ~ z^(k-1) e^-z (1 + (k-1)/z + (k-1)(k-2)/z^2)
        # (Abramowitz & Stegun 6.5.32); it is only reached where gammaincc has underflowed (z >~ 700).
        series = 1.0 + (k - 1) / zd + (k - 1) * (k - 2) / zd**2
        out[deep] = (k - 1) * np.log(zd) - zd - special.gammaln(k) + np.log(np.maximum(series, 1e-300))
    return out


_LOGSF = {
    "weibull": lambda z, p: -(z ** p["shape"]),
    "exponential": lambda z, p: -z,
    "lognormal": lambda z, p: special.log_ndtr(-(np.log(z) - p["mu"]) / p["sigma"]),
    "gamma": _gamma_logsf,
    "normal": lambda z, p: special.log_ndtr(-z),
    "loglogistic": lambda z, p: -np.logaddexp(0.0, p["shape"] * np.log(z)),
    "smallest_extreme_value": lambda z, p: -np.exp(z),
    "birnbaum_saunders": lambda z, p: special.log_ndtr(-(np.sqrt(z) - 1.0 / np.sqrt(z)) / p["shape"]),
}


def _log_likelihood(fam: Family, params: dict, t: np.ndarray, failed: np.ndarray) -> float:
    """sum log f(t_i) over failures + sum log R(t_i) over suspensions (Meeker & Escobar 1998, ch. 7)."""
    loc = params[fam.location_key] if fam.location_key else 0.0
    scale = params[fam.scale_key] if fam.scale_key else 1.0
    z = (t - loc) / scale
    with np.errstate(all="ignore"):
        total = float(np.sum(fam.logpdf(z[failed], params)) - failed.sum() * math.log(scale))
        if not np.all(failed):
            total += float(np.sum(_LOGSF[fam.name](z[~failed], params)))
    return total if math.isfinite(total) else -math.inf


# ---- input checking --------------------------------------------------------------------
def _family(name) -> Family:
    key = str(name).strip().lower().replace("-", "_").replace(" ", "_")
    if key not in FAMILIES:
        FamilyTarget(name)  # raises the families module's own "unknown family" message
    return FAMILIES[key]


def _check_times(times) -> np.ndarray:
    try:
        t = np.asarray(times, dtype=float)
    except (TypeError, ValueError):
        raise ModelError("times", "must be a list of numbers") from None
    if t.ndim == 0:
        t = t.reshape(1)
    if t.ndim != 1:
        raise ModelError("times", f"must be a one-dimensional list, got shape {t.shape}")
    if t.size == 0:
        raise ModelError("times", "no data")
    # Rows are counted from 1, as a person reads a table.
    bad = np.flatnonzero(~np.isfinite(t))
    if bad.size:
        i = int(bad[0])
        raise ModelError("times", f"value {t[i]} (row {i + 1}) is not a finite number")
    bad = np.flatnonzero(t < 0)
    if bad.size:
        i = int(bad[0])
        raise ModelError("times", f"value {t[i]:g} (row {i + 1}) is negative; lifetimes must be positive")
    bad = np.flatnonzero(t == 0)
    if bad.size:
        i = int(bad[0])
        raise ModelError("times", f"value 0 (row {i + 1}) is zero; lifetimes must be positive")
    return t


def _check_censored(censored, n: int) -> np.ndarray:
    return censoring_flags("censored", censored, n)


def _fixed_location(fam: Family) -> str | None:
    """The parameter held fixed rather than estimated: a location that has a default."""
    for p in fam.params:
        if p.default is not None:
            return p.name
    return None


# ---- plotting positions and starting values ----------------------------------------------
def _plotting_positions(t: np.ndarray, failed: np.ndarray):
    """Failure times and Herd-Johnson product-limit plotting positions F_i.

    F = 1 - prod (r_j / (r_j + 1)) over failures j up to i, r_j the reverse rank; for
    complete data it is the mean rank i/(n+1) (Nelson, Applied Life Data Analysis, 1982, ch. 4).
    """
    # At tied times failures come first: a unit suspended at t was still at risk at t.
    order = np.lexsort((~failed, t))
    ts, fs = t[order], failed[order]
    reverse_rank = t.size - np.arange(t.size)
    log_factor = np.where(fs, np.log(reverse_rank / (reverse_rank + 1.0)), 0.0)
    survival = np.exp(np.cumsum(log_factor))
    return ts[fs], 1.0 - survival[fs]


def _line(x: np.ndarray, y: np.ndarray):
    """Least-squares y = a + b x; b is None where x or y do not vary."""
    if x.size < 2 or np.ptp(x) == 0 or np.ptp(y) == 0:
        return float(np.mean(y)), None
    b, a = np.polyfit(x, y, 1)
    return float(a), (float(b) if b > 0 else None)


def _profile_sev(y: np.ndarray, failed: np.ndarray):
    """MLE (mu, sigma) of the smallest-extreme-value law for y with right censoring.

    Given sigma, mu has the closed form exp(mu/sigma) = sum_all exp(y_i/sigma) / r; putting it
    into the sigma score leaves the profile equation (Meeker & Escobar 1998, ch. 8; for the
    Weibull with y = ln t it is the shape equation of NIST e-Handbook 8.4.1.2)
        h(sigma) = sum_i w_i y_i - sigma - mean(y over failures) = 0,  w = softmax(y/sigma),
    with dh/dsigma = -Var_w(y)/sigma^2 - 1 < 0, so the root is unique and bracketing always works.
    Returns None where h has no root (every failure at the same age and no later suspension).
    """
    r = int(failed.sum())
    centre = float(np.mean(y[failed]))
    spread = float(np.std(y[failed])) or float(np.max(np.abs(y - centre))) or 1.0
    u = (y - centre) / spread  # unit-free, so the bracket search starts near the answer

    def h(s):
        w = special.softmax(u / s)
        return float(np.dot(w, u)) - s

    lo = hi = 1.0
    for _ in range(200):
        if h(lo) > 0:
            break
        lo *= 0.5
    else:
        return None
    for _ in range(200):
        if h(hi) < 0:
            break
        hi *= 2.0
    s = optimize.brentq(h, lo, hi, xtol=1e-15, rtol=4 * np.finfo(float).eps, maxiter=500)
    m = s * (special.logsumexp(u / s) - math.log(r))
    return centre + spread * m, spread * s


def _weibull_start(t, failed, location):
    prof = _profile_sev(np.log(t - location), failed)
    if prof is None:
        return None
    mu, sigma = prof
    return {"shape": 1.0 / sigma, "scale": math.exp(mu)}


def _starting_values(fam: Family, t, failed, location) -> dict | None:
    """Good starting values (or the exact answer, for the Weibull, SEV and exponential)."""
    name = fam.name
    if name == "exponential":
        # theta = total time on test / number of failures (NIST e-Handbook 8.4.1.1; closed form).
        return {"scale": float(np.sum(t - location)) / int(failed.sum())}
    if name == "weibull":
        return _weibull_start(t, failed, location)
    if name == "smallest_extreme_value":
        prof = _profile_sev(t, failed)
        return None if prof is None else {"location": prof[0], "scale": prof[1]}
    if name == "gamma":
        # Match the mean and variance of the Weibull fit, which extrapolates past suspensions.
        w = _weibull_start(t, failed, location)
        if w is None:
            return None
        b, eta = w["shape"], w["scale"]
        g1, g2 = special.gamma(1 + 1 / b), special.gamma(1 + 2 / b)
        mean, var = eta * g1, eta**2 * max(g2 - g1 * g1, 1e-12)
        return {"shape": mean * mean / var, "scale": var / mean}
    tf, F = _plotting_positions(t, failed)
    if name == "normal":
        a, b = _line(special.ndtri(F), tf)
        return {"mean": a, "sd": b if b else max(abs(a) * 0.1, 1e-3)}
    y = np.log(tf - location)
    if name in ("lognormal", "birnbaum_saunders"):
        a, b = _line(special.ndtri(F), y)
        b = b or 1.0
        # For small shape, ln T of a Birnbaum-Saunders law is nearly normal with sd = shape
        # and median = scale (Birnbaum & Saunders 1969), so the lognormal line starts both.
        return {"mu": a, "sigma": b} if name == "lognormal" else {"shape": b, "scale": math.exp(a)}
    if name == "loglogistic":
        # ln t = ln alpha + logit(F) / beta on log-logistic paper.
        a, b = _line(special.logit(F), y)
        return {"shape": 1.0 / b if b else 1.0, "scale": math.exp(a)}
    raise ModelError("family", f"no starting values for the {fam.title} family")  # pragma: no cover


# ---- optimisation ----------------------------------------------------------------------
class _Coordinates:
    """Map between the estimated natural parameters and an unconstrained vector.

    Positive parameters enter as log(theta); the others as theta / ref, with ref the
    family's spread parameter at the start, so every coordinate is of order one.
    """

    def __init__(self, fam: Family, names: list[str], start: dict):
        self.names = names
        self.positive = [next(p for p in fam.params if p.name == k).positive for k in names]
        spread = [start[k] for k, pos in zip(names, self.positive) if pos]
        self.ref = abs(spread[0]) if spread else 1.0

    def to_u(self, values: dict) -> np.ndarray:
        return np.array([math.log(values[k]) if pos else values[k] / self.ref
                         for k, pos in zip(self.names, self.positive)])

    def to_natural(self, u) -> dict:
        return {k: (math.exp(x) if pos else x * self.ref)
                for k, x, pos in zip(self.names, u, self.positive)}

    def steps(self, values: dict, rel: float) -> np.ndarray:
        """Finite-difference steps in the natural parameters, relative to each one's size."""
        spread = [values[k] for k, pos in zip(self.names, self.positive) if pos]
        ref = abs(spread[0]) if spread else self.ref
        return np.array([rel * (abs(values[k]) if pos else ref)
                         for k, pos in zip(self.names, self.positive)])


def _maximise(fam, names, start, fixed, t, failed):
    """Maximise the log-likelihood from ``start``; returns (estimates, converged).

    Raises ModelError where the likelihood keeps rising toward the edge of the parameter
    space (the maximum does not exist; e.g. a Birnbaum-Saunders fit to few failures).
    """
    coords = _Coordinates(fam, names, start)
    n = t.size

    def objective(u):
        with np.errstate(over="ignore"):
            try:
                nat = coords.to_natural(u)
            except OverflowError:
                return math.inf
        ll = _log_likelihood(fam, {**nat, **fixed}, t, failed)
        # Per unit, so tolerances mean the same for 10 units or 10 000.
        return -ll / n if math.isfinite(ll) else math.inf

    u0 = coords.to_u(start)
    best = [u0, objective(u0)]

    def keep(res):
        if np.all(np.isfinite(res.x)) and res.fun <= best[1]:
            best[:] = [res.x, res.fun]
        return bool(res.success)

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        bfgs = dict(method="BFGS", jac="3-point", options=dict(gtol=1e-9, maxiter=500))
        try:
            done = keep(optimize.minimize(objective, u0, **bfgs))
        except (ValueError, FloatingPointError, OverflowError):
            done = False
        if not done:
            # The derivative-free fallback copes with flat or ragged likelihoods; BFGS then polishes.
            keep(optimize.minimize(objective, best[0], method="Nelder-Mead",
                                   options=dict(xatol=1e-10, fatol=1e-14, maxiter=20000, maxfev=20000)))
            try:
                keep(optimize.minimize(objective, best[0], **bfgs))
            except (ValueError, FloatingPointError, OverflowError):
                pass
    u, f = best
    if not math.isfinite(f):
        raise ModelError("times", f"the {fam.title} likelihood is zero for every parameter value tried")

    def gradient(x):
        # Five-point central differences: error O(h^4), so a narrow ridge (a gamma law with a
        # large shape) does not drown the gradient in truncation error.
        h = 1e-4 * np.maximum(1.0, np.abs(x))
        return np.array([(8 * (objective(x + e) - objective(x - e))
                          - (objective(x + 2 * e) - objective(x - 2 * e))) / (12 * e.sum())
                         for e in np.diag(h)])

    def hessian(x):
        h = 1e-4 * np.maximum(1.0, np.abs(x))
        return _central_hessian(objective, x, h)

    # Newton steps both polish the optimum and test it: at a maximum the Hessian of -log L is
    # positive definite and the Newton step is negligible (the Newton-decrement stopping rule,
    # Boyd & Vandenberghe, Convex Optimization, 2004, sec. 9.5.1).
    converged = False
    for _ in range(5):
        hess = hessian(u)
        eigen, vectors = np.linalg.eigh(hess)
        if not np.all(eigen > 0):
            break
        grad = gradient(u)
        step = -np.linalg.solve(hess, grad)
        # Done when the step is negligible or the log-likelihood it could still gain (half the
        # squared Newton decrement, times n) is below the rounding noise of log L itself.
        if np.max(np.abs(step)) < 1e-6 or -0.5 * n * float(grad @ step) < 1e-10:
            converged = True
            break
        trial = objective(u + step)
        if not trial <= f:
            break
        u, f = u + step, trial
    hess = hessian(u)
    eigen, vectors = np.linalg.eigh(hess)

    # Where the likelihood rises toward a degenerate limit (e.g. a Birnbaum-Saunders fit to
    # few failures, whose supremum is a law with half its mass at infinity) the optimiser
    # stops on a flat ridge. Five units along the flattest direction, a true maximum has
    # clearly fallen off; a ridge has not.
    weakest = vectors[:, int(np.argmin(eigen))] if np.all(np.isfinite(eigen)) else None
    if weakest is not None:
        nearby = min(objective(u + 5.0 * weakest), objective(u - 5.0 * weakest))
        if nearby <= f + 0.01 / n:
            raise ModelError("times", f"the {fam.title} likelihood keeps rising toward a degenerate "
                                      "limit and has no maximum for these data (too few failures "
                                      "to pin it down); try another family")
    return coords.to_natural(u), converged


def _central_hessian(f, x0: np.ndarray, h: np.ndarray) -> np.ndarray:
    """Second derivatives of f at x0 by central differences with steps h."""
    k = x0.size
    f0 = f(x0)
    hess = np.empty((k, k))
    e = np.diag(h)
    for i in range(k):
        hess[i, i] = (f(x0 + e[i]) - 2 * f0 + f(x0 - e[i])) / h[i] ** 2
        for j in range(i):
            hess[i, j] = hess[j, i] = (f(x0 + e[i] + e[j]) - f(x0 + e[i] - e[j])
                                      - f(x0 - e[i] + e[j]) + f(x0 - e[i] - e[j])) / (4 * h[i] * h[j])
    return hess


def _observed_information(fam, names, est, fixed, t, failed) -> np.ndarray:
    """Hessian of -log L in the natural parameters, by central differences.

    Its inverse estimates the covariance of the estimates (Meeker & Escobar 1998, ch. 8).
    """
    # Step ~ eps^(1/4) of each parameter's size balances truncation against rounding error.
    h = _Coordinates(fam, names, est).steps(est, 1e-4)
    x0 = np.array([est[k] for k in names])
    return _central_hessian(
        lambda x: -_log_likelihood(fam, {**dict(zip(names, x)), **fixed}, t, failed), x0, h)


# ---- the public verb -----------------------------------------------------------------------
def fit_family(name: str, times, censored=None, *, location: float | None = None,
               confidence: float = 0.95) -> FamilyTarget:
    """Fit family ``name`` to failure and suspension times by censored maximum likelihood.

    The log-likelihood is sum log f(t_i) over failures plus sum log R(t_i) over suspensions
    (Meeker & Escobar 1998, ch. 7-8; NIST/SEMATECH e-Handbook 8.4.1.2).

    ``times`` are ages at failure or at suspension; ``censored`` flags suspensions (True: the
    unit was still running when last seen, i.e. right-censored). By default every time is a
    failure.

    ``location`` (default 0) is the failure-free period of the Weibull, exponential, lognormal
    and gamma families. It is held fixed, not estimated: with a free threshold the likelihood
    is irregular (unbounded when the shape is below one, and the usual large-sample theory
    fails below shape two; Smith 1985, Biometrika 72), so it is the user's choice. The normal
    mean and the smallest-extreme-value location are ordinary parameters and are estimated.

    Returns a ``FamilyTarget`` with ``.params`` and ``.fit_info``, a dict with:
    ``loglik``; ``aic`` (2k - 2 loglik, k estimated parameters); ``n_failures``;
    ``n_suspensions``; ``parameters`` (the estimated ones, in covariance order);
    ``standard_errors``; ``covariance`` (nested lists, the inverse of the observed information,
    a numerically differentiated Hessian of -log L at the optimum in the natural parameters);
    ``confidence``; ``bounds`` (Wald intervals; for positive parameters on the log scale,
    theta * exp(+-z se/theta), Meeker & Escobar 1998, sec. 8.4); ``fixed`` (parameters held fixed);
    ``converged``; ``method``.
    """
    fam = _family(name)
    t = _check_times(times)
    failed = ~_check_censored(censored, t.size)
    confidence = finite_number("confidence", confidence)
    if not 0.0 < confidence < 1.0:
        raise ModelError("confidence", f"must lie strictly between 0 and 1, got {confidence:g}")

    fixed_key = _fixed_location(fam)
    if fixed_key is None:
        if location is not None:
            raise ModelError("location", f"the {fam.title} family has no failure-free period to hold "
                                         "fixed; leave location unset")
        fixed, loc = {}, 0.0
    else:
        loc = 0.0 if location is None else finite_number("location", location)
        if loc >= t.min():
            raise ModelError("location", f"must be below the smallest time ({t.min():g}), got {loc:g}")
        fixed = {fixed_key: loc}
    names = [p.name for p in fam.params if p.name not in fixed]

    r = int(failed.sum())
    if r == 0:
        raise ModelError("censored", "every unit is a suspension; at least one failure is needed")
    if r < len(names):
        raise ModelError("censored", f"the {fam.title} fit estimates {len(names)} parameters "
                                     f"({', '.join(names)}) but the data hold only {r} failure(s); "
                                     f"at least {len(names)} failures are needed")

    start = _starting_values(fam, t, failed, loc)
    no_spread = len(names) > 1 and np.ptp(t[failed]) == 0 and not np.any(t[~failed] > t[failed][0])
    if start is None or no_spread:
        raise ModelError("times", "every failure is at the same age and no unit ran longer, so the "
                                  f"spread of the {fam.title} law cannot be estimated")
    if fam.name in ("weibull", "exponential", "smallest_extreme_value"):
        est, converged = start, True  # exact: closed form or the unique root of the profile equation
    else:
        est, converged = _maximise(fam, names, start, fixed, t, failed)
    if not all(math.isfinite(v) for v in est.values()) or any(
            est[p.name] <= 0 for p in fam.params if p.positive and p.name in est):
        raise ModelError("times", f"the {fam.title} likelihood has no maximum for these data")

    params = {**est, **fixed}
    loglik = _log_likelihood(fam, params, t, failed)
    hess = _observed_information(fam, names, est, fixed, t, failed)
    k = len(names)
    try:
        eigen = np.linalg.eigvalsh(hess)
        cov = np.linalg.inv(hess) if np.all(eigen > 0) else np.full((k, k), np.nan)
    except np.linalg.LinAlgError:
        cov = np.full((k, k), np.nan)
    if not np.all(np.isfinite(cov)):
        converged = False  # not a proper maximum: no curvature in some direction

    z = float(special.ndtri(0.5 + confidence / 2))
    se = {key: float(math.sqrt(cov[i, i])) if cov[i, i] >= 0 else math.nan for i, key in enumerate(names)}
    bounds = {}
    for key in names:
        value, s = est[key], se[key]
        if next(p for p in fam.params if p.name == key).positive:
            # Wald on log(theta), se(log theta) = se/theta by the delta method, so the interval
            # stays positive (Meeker & Escobar 1998, sec. 8.4).
            with np.errstate(over="ignore"):
                w = float(np.exp(z * s / value))
            bounds[key] = (value / w, value * w)
        else:
            bounds[key] = (value - z * s, value + z * s)

    target = FamilyTarget(fam.name, **params)
    target.fit_info = {
        "loglik": loglik,
        "aic": 2 * k - 2 * loglik,
        "n_failures": r,
        "n_suspensions": int(t.size - r),
        "parameters": names,
        "standard_errors": se,
        "covariance": cov.tolist(),
        "confidence": confidence,
        "bounds": bounds,
        "fixed": dict(fixed),
        "converged": bool(converged),
        "method": METHOD,
    }
    return target
