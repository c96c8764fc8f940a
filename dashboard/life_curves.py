"""Plain data for the pictures reliability engineers read: the hazard rate h(t), the cumulative
hazard H(t) and the probability plot on Weibull scales, for the model, the draws and field data.

Estimates from the draws come from the bounded histogram of all draws (actuarial life-table
hazard per bin, with an exact Poisson band on the failures of each bin: Garwood 1936) and from
the reservoir sample (quantiles for the probability plot). Field data gets its own plotting
positions: Johnson's adjusted ranks with Benard's median-rank approximation (Johnson 1964,
"The statistical treatment of fatigue experiments"; Benard & Bos-Levenbach 1953), which reduce
to the plain median ranks (i - 0.3)/(n + 0.4) when nothing is suspended. No UI imports here.
"""
from __future__ import annotations

import numpy as np
from scipy import stats as _stats

from .weibull_scale import WEIBULL_P, weibull_y

#: Bins with fewer units at risk than this are left out of the hazard estimate (too noisy to read).
MIN_AT_RISK = 100
#: Two-sided confidence of the bands.
BAND = 0.95
CURVE_POINTS = 400
def poisson_band(d, level: float = BAND):
    """Exact (Garwood) confidence limits for a Poisson mean given d observed events."""
    d = np.asarray(d, dtype=float)
    a = (1 - level) / 2
    lower = np.where(d > 0, _stats.chi2.ppf(a, 2 * d) / 2, 0.0)
    upper = _stats.chi2.ppf(1 - a, 2 * d + 2) / 2
    return lower, upper


def model_hazard(target, edges, view_right: float, log: bool) -> dict:
    """The model's h(t) and H(t) = -ln R(t) on a grid over the histogram's range (cache per model).
    For a model with atoms (field data) h(t) is not a curve: its own per-bin actuarial hazard
    from cdf differences is given instead."""
    edges = np.asarray(edges, dtype=float)
    widths = np.diff(edges)
    right = float(edges[-1]) if log else float(view_right)
    left = float(edges[0])
    if log:
        positive = edges[edges > 0]
        left = max(left, float(positive[0]) if positive.size else 1e-12)
    x = np.geomspace(left, right, CURVE_POINTS) if log and right > left > 0 else np.linspace(left, right, CURVE_POINTS)
    if x[0] <= target.support[0]:
        # The model's functions treat the support's end as outside it (h = 0 there): start just inside.
        x[0] = np.nextafter(float(target.support[0]), np.inf)
    atoms = bool(np.asarray(target.atoms).size)
    if atoms:
        F = np.asarray(target.cdf(edges), dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            per_bin = np.diff(F) / (widths * (1 - F[:-1] - np.diff(F) / 2))
        model_x, model_h = (edges[:-1] + edges[1:]) / 2, np.where(np.isfinite(per_bin), per_bin, np.nan)
    else:
        model_x, model_h = x, np.asarray(target.hazard(x), dtype=float)
    return {"x": x, "model_x": model_x, "model_h": model_h, "model_per_bin": atoms,
            "model_H": np.asarray(target.cumulative_hazard(x), dtype=float), "log": bool(log)}


def draws_hazard(edges, counts, below: int, n: int) -> dict:
    """Estimates of h(t) and H(t) from the binned draws, with their bands.

    Per bin k with d_k failures among R_k units at risk at its start, the actuarial
    estimate is h_k = d_k / (w_k (R_k - d_k/2)) (life-table method; Lawless 2003,
    "Statistical Models and Methods for Lifetime Data", section 3.6), its band the exact
    Poisson limits of d_k over the same exposure. H(t) at the bin edges is -ln of the
    share still running, with a delta-method band sqrt((1 - S)/(n S)).
    """
    edges = np.asarray(edges, dtype=float)
    counts = np.asarray(counts, dtype=float)
    widths = np.diff(edges)
    at_risk = n - below - np.concatenate([[0.0], np.cumsum(counts)[:-1]])
    exposure = widths * (at_risk - counts / 2)
    ok = (at_risk >= MIN_AT_RISK) & (exposure > 0)
    lo, hi = poisson_band(counts)
    with np.errstate(divide="ignore", invalid="ignore"):
        est, band_lo, band_hi = counts / exposure, lo / exposure, hi / exposure
    mid = (edges[:-1] + edges[1:]) / 2
    share_running = np.clip((n - below - np.concatenate([[0.0], np.cumsum(counts)])) / max(n, 1), 0.0, 1.0)
    keep_H = share_running * n >= MIN_AT_RISK
    z = _stats.norm.ppf(0.5 + BAND / 2)
    with np.errstate(divide="ignore", invalid="ignore"):
        H_est = -np.log(share_running)
        H_sd = np.sqrt((1 - share_running) / (max(n, 1) * share_running))
        H_lower, H_upper = np.maximum(H_est - z * H_sd, 0.0), H_est + z * H_sd
    return {"mid": mid[ok], "estimate": est[ok], "lower": band_lo[ok], "upper": band_hi[ok],
            "edges": edges[keep_H], "H": H_est[keep_H], "H_lower": H_lower[keep_H], "H_upper": H_upper[keep_H],
            "n": int(n), "band": BAND}


def hazard_payload(target, edges, counts, below: int, n: int, view_right: float, log: bool, unit: str,
                   model: dict | None = None) -> dict:
    """Everything the hazard pictures need; ``model`` reuses a cached ``model_hazard``."""
    model = model or model_hazard(target, edges, view_right, log)
    return {**model, **draws_hazard(edges, counts, below, n), "unit": unit}


def adjusted_ranks(times, censored) -> tuple[np.ndarray, np.ndarray]:
    """Failure times and their plotting positions F_i by Johnson's adjusted ranks and Benard's
    approximation: order_i = n + 1 - (n + 1) prod_{j <= i} r_j/(r_j + 1) over failures, with
    r_j the reverse rank, then F_i = (order_i - 0.3)/(n + 0.4)."""
    t = np.asarray(times, dtype=float)
    c = np.asarray(censored, dtype=bool) if censored is not None else np.zeros(t.size, dtype=bool)
    order = np.lexsort((c, t))                # failures before suspensions at tied ages (convention)
    t, c = t[order], c[order]
    n = t.size
    reverse = n - np.arange(n)                # units at this age or older
    # Each failure adds (n + 1 - previous order)/(1 + reverse rank) to the order; written as a product.
    factor = np.where(~c, reverse / (reverse + 1.0), 1.0)
    orders = (n + 1) * (1 - np.cumprod(factor))
    return t[~c], (orders[~c] - 0.3) / (n + 0.4)


def field_points(target) -> dict | None:
    """The field data's own points for the probability plot, or None for a model without data."""
    kind = getattr(target, "kind", "")
    if kind == "failures":
        t, F = adjusted_ranks(target.times, target.censored)
        how = "adjusted median ranks (Johnson, Benard)"
    elif kind == "histogram":
        counts = np.asarray(target.counts, dtype=float)
        cum = np.cumsum(counts)
        t = np.asarray(target.edges, dtype=float)[1:]
        F = (cum - 0.3) / (cum[-1] + 0.4)
        keep = counts > 0
        t, F = t[keep], F[keep]
        how = "cumulative counts at the bin ends, median ranks (Benard)"
    else:
        return None
    good = (t > 0) & (F > 0) & (F < 1)
    return {"t": t[good], "F": F[good], "how": how}


def model_weibull(target) -> dict:
    """The model's quantiles at the probability plot's positions and the field data's own points
    (cache per model)."""
    return {"p": WEIBULL_P, "y": weibull_y(WEIBULL_P), "model_t": np.asarray(target.quantile(WEIBULL_P), dtype=float),
            "field": field_points(target)}


def weibull_payload(target, sample_quantiles, n_reservoir: int, n: int, unit: str,
                    model: dict | None = None) -> dict:
    """Probability plot on Weibull scales: the model's cdf as a line, the draws' quantiles as
    points at the same probabilities, and field data as its own points."""
    model = model or model_weibull(target)
    p = model["p"]
    sample_t = np.asarray(sample_quantiles(p), dtype=float) if n_reservoir else np.full(p.shape, np.nan)
    return {**model, "sample_t": sample_t, "n": int(n), "unit": unit}


def line_fit(t, p) -> tuple[float, float]:
    """Least-squares line y = slope ln t + intercept through points on Weibull scales."""
    t = np.asarray(t, dtype=float)
    y = weibull_y(p)
    ok = (t > 0) & np.isfinite(y)
    slope, intercept = np.polyfit(np.log(t[ok]), y[ok], 1)
    return float(slope), float(intercept)
