"""Goodness-of-fit report: do a sampler's draws follow its target model?

Kolmogorov-Smirnov, Anderson & Darling (1954) with the Marsaglia & Marsaglia (2004)
p-value, Pearson's chi-square on equiprobable cells, QQ/PP arrays, moments, tail mass, u-error.
"""
from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

import numpy as np
from scipy import special as _special
from scipy import stats as _stats

from .errors import ModelError, finite_number, sample_size

MIN_SAMPLES = 20
PLOT_POINTS = 400
U_GRID_SIZE = 10_000
MIN_EXPECTED = 5.0
Z_LIMIT = 5.0
# Normal approximation to a binomial count: a common rule of thumb asks for n·p·(1-p) >= 9.
NORMAL_APPROX_MIN_VARIANCE = 9.0
DEFAULT_QUANTILES = (0.001, 0.01, 0.1, 0.5, 0.9, 0.99, 0.999)

_TARGET_METHODS = ("cdf", "sf", "quantile", "mean", "var", "moment")


@dataclass
class CheckReport:
    """Everything ``check`` measured; ``passed`` turns it into one verdict.

    p-values that do not apply are ``None`` (chi-square with fewer than two cells).
    ``u_error`` is what the sampler states, ``u_error_measured`` what ``check``
    re-measured through the sampler's ``quantile`` (``None`` when either is absent).
    """

    n: int
    target: str
    method: str | None
    ks_statistic: float
    ks_pvalue: float
    ad_statistic: float
    ad_pvalue: float
    chi2_statistic: float | None
    chi2_pvalue: float | None
    chi2_dof: int | None
    chi2_cells: dict
    qq: dict
    pp: dict
    u_error: float | None
    u_error_measured: float | None
    moments: dict
    tail: list
    notes: list = field(default_factory=list)

    def passed(self, alpha: float = 1e-3, u_tolerance: float | None = None) -> bool:
        """True when no test rejects the target.

        Every p-value must be >= ``alpha``; the z-scores of the mean and of each
        tail fraction (where the normal approximation holds) must be below 5 in
        absolute value; and, when ``u_tolerance`` is given and a u-error is
        known (measured if possible, else the stated one), it must not exceed it.
        """
        alpha = finite_number("alpha", alpha, low=0.0, high=1.0)
        for p in (self.ks_pvalue, self.ad_pvalue, self.chi2_pvalue):
            # Written as "not >=" so that a NaN p-value fails.
            if p is not None and not p >= alpha:
                return False
        z = self.moments.get("mean_z")
        if z is not None and not abs(z) < Z_LIMIT:
            return False
        for row in self.tail:
            if row["normal_ok"] and not abs(row["z"]) < Z_LIMIT:
                return False
        if u_tolerance is not None:
            u_tolerance = finite_number("u_tolerance", u_tolerance, nonnegative=True)
            u = self.u_error_measured if self.u_error_measured is not None else self.u_error
            if u is not None and not u <= u_tolerance:
                return False
        return True

    def to_dict(self) -> dict:
        """A JSON-ready dict: arrays become lists, NaN and ±inf become None (strict JSON has neither)."""
        out = _jsonable(asdict(self))
        out["passed"] = self.passed()
        return out

    def summary(self, alpha: float = 1e-3) -> str:
        """A plain-text table of every figure, for a terminal."""
        lines = [f"Check of {self.method or 'given'} draws, n = {self.n:,}",
                 "target: " + self.target.replace("\n", "\n        "), ""]
        lines.append(f"{'test':<26}{'statistic':>12}{'p-value':>12}  verdict")
        rows = [("Kolmogorov-Smirnov", self.ks_statistic, self.ks_pvalue),
                ("Anderson-Darling", self.ad_statistic, self.ad_pvalue),
                ("Chi-square" + (f" ({self.chi2_dof} dof)" if self.chi2_dof else ""),
                 self.chi2_statistic, self.chi2_pvalue)]
        for name, stat, p in rows:
            verdict = "n/a" if p is None else ("ok" if p >= alpha else "REJECT")
            lines.append(f"{name:<26}{_fmt(stat):>12}{_fmt(p):>12}  {verdict}")
        m = self.moments
        lines += ["", f"{'moment':<26}{'sample':>12}{'model':>12}{'z':>9}"]
        lines.append(f"{'mean':<26}{_fmt(m['sample_mean']):>12}{_fmt(m['target_mean']):>12}"
                     f"{_fmt(m['mean_z'], 3):>9}")
        lines.append(f"{'standard deviation':<26}{_fmt(m['sample_sd']):>12}{_fmt(m['target_sd']):>12}")
        lines.append(f"{'skewness':<26}{_fmt(m['sample_skewness']):>12}{_fmt(m['target_skewness']):>12}")
        lines += ["", f"{'tail mass P(X <= x_q)':<26}{'observed':>12}{'model':>12}{'z':>9}"]
        for row in self.tail:
            flag = "" if row["normal_ok"] else "  (normal approx. poor: not judged)"
            lines.append(f"{'q = ' + format(row['q'], 'g'):<26}{_fmt(row['observed']):>12}"
                         f"{_fmt(row['expected']):>12}{_fmt(row['z'], 3):>9}{flag}")
        if self.u_error is not None or self.u_error_measured is not None:
            lines += ["", f"u-error |u - F(Q(u))|: sampler's estimate {_fmt(self.u_error)} (maximum over its "
                          f"set-up test points), re-measured here {_fmt(self.u_error_measured)} (maximum over "
                          f"{U_GRID_SIZE:,} other points)",
                      "  both are estimates (maxima over test points), not bounds: the two may differ by a "
                      "few percent either way"]
        if self.notes:
            lines += ["", "notes:"] + [f"- {note}" for note in self.notes]
        overall = "PASS" if self.passed(alpha) else "FAIL"
        lines += ["", f"overall: {overall} (alpha = {alpha:g}, |z| < {Z_LIMIT:g})",
                  f"verdicts: REJECT (and FAIL) when a p-value is below alpha = {alpha:g} or a judged |z| reaches "
                  f"{Z_LIMIT:g}; a correct sampler is still rejected by each test about 1 time in "
                  f"{1.0 / alpha:,.0f}"]
        return "\n".join(lines)


def check(sampler_or_samples, target=None, n=100_000, rng=20261201,
          quantiles=DEFAULT_QUANTILES, bins=None) -> CheckReport:
    """Test draws against a target model and collect the evidence in a ``CheckReport``.

    ``sampler_or_samples`` is a sampler (``n`` draws are taken with
    ``np.random.default_rng(rng)``; ``target`` defaults to ``sampler.target``)
    or a 1-D array of draws (``target`` required). ``quantiles`` sets the tail-mass
    rows. ``bins`` sets the number of equiprobable chi-square cells before merging
    (default about 2·n^0.4, common practice; Moore 1986, in D'Agostino & Stephens,
    Goodness-of-Fit Techniques, ch. 3 recommends 2·n^(2/5), from memory).
    Cells are capped at n/5 and merged until each expects at least 5 draws.

    KS is ``scipy.stats.kstest`` for a continuous target. With atoms, D is taken
    with the model's left limits F(x-) and referred to ``scipy.stats.kstwo``, the
    continuous-case law, which makes the p-value conservative (noted in the report).
    Anderson-Darling at atoms uses a randomized transform drawn from ``rng`` after
    the sampler's draws.
    """
    quantiles = _validate_quantiles(quantiles)
    if bins is not None:
        bins = sample_size("bins", bins)
        if bins < 2:
            raise ModelError("bins", f"must be at least 2, got {bins}")
    gen = np.random.default_rng(rng)
    sampler = None
    if _is_sampler(sampler_or_samples):
        sampler = sampler_or_samples
        if target is None:
            target = sampler.target
        n = sample_size("n", n)
        if n < MIN_SAMPLES:
            raise ModelError("n", f"must be at least {MIN_SAMPLES} to test a fit, got {n}")
        _require_target(target)
        raw = sampler.sample(n, gen)
    else:
        if target is None:
            raise ModelError("target", "is needed to check an array of samples: "
                                       "pass the model the samples should follow")
        _require_target(target)
        raw = sampler_or_samples
    xs = np.sort(_validate_samples(raw))
    n = xs.size

    atoms = _atoms(target)
    notes: list[str] = []
    stats = dict(getattr(sampler, "stats", None) or {}) if sampler is not None else {}
    method = stats.get("method") or (type(sampler).__name__ if sampler is not None else None)

    F = np.asarray(target.cdf(xs), dtype=float)
    S = np.asarray(target.sf(xs), dtype=float)
    on_atom = np.isin(xs, atoms) if atoms.size else np.zeros(n, dtype=bool)
    F_left, S_left = F.copy(), S.copy()
    if on_atom.any():
        left = np.nextafter(xs[on_atom], -np.inf)
        F_left[on_atom] = target.cdf(left)
        S_left[on_atom] = target.sf(left)

    ks_stat, ks_p = _kolmogorov_smirnov(xs, target, F, F_left, atoms.size > 0)
    ad_stat, ad_p = _anderson_darling_at_atoms(F, S, F_left, S_left, on_atom, gen)
    chi2_stat, chi2_p, chi2_dof, cells = _chi_square(xs, target, bins)
    if atoms.size:
        notes.append("The target has atoms: the Kolmogorov-Smirnov p-value assumes a continuous "
                     "cdf and is conservative for a discontinuous one (Noether 1963).")
        notes.append("The target has atoms: Anderson-Darling uses randomized probability integral "
                     "values at the atoms (Dunn & Smyth 1996), which are exactly uniform under the model.")
    if chi2_p is None:
        notes.append("Chi-square not applicable: fewer than two classes with expected count >= 5.")

    lo, hi = _support(target)
    outside = int(np.count_nonzero((xs < lo) | (xs > hi)))
    if outside:
        notes.append(f"{outside} draws lie outside the target's support [{lo:g}, {hi:g}].")

    u_error = stats.get("u_error")
    u_error = None if u_error is None else float(u_error)
    u_measured = None
    if sampler is not None and callable(getattr(sampler, "quantile", None)):
        u_measured = measure_u_error(sampler.quantile, target)
        tolerance = stats.get("tolerance")
        if tolerance is not None and u_measured > float(tolerance):
            notes.append(f"Measured u-error {u_measured:.3g} exceeds the sampler's tolerance {float(tolerance):.3g}.")
        elif u_error is not None and u_measured > 1.1 * u_error:
            # Both are maxima over test points (estimates): a few percent apart only means
            # the points differ; more than 10 % says the sampler's own estimate is off.
            notes.append(f"Measured u-error {u_measured:.3g} exceeds the sampler's estimate {u_error:.3g} "
                         "by more than 10 %.")

    moments = _moments(xs, target, notes)
    tail = _tail_mass(xs, target, quantiles)
    if any(not row["normal_ok"] for row in tail):
        notes.append("Tail rows with n·p·(1-p) < 9 (p the model's P(X <= x_q)) show z but do not "
                     "count towards the verdict: the normal approximation to the binomial count is poor there.")

    return CheckReport(
        n=n, target=_describe(target), method=method,
        ks_statistic=ks_stat, ks_pvalue=ks_p, ad_statistic=ad_stat, ad_pvalue=ad_p,
        chi2_statistic=chi2_stat, chi2_pvalue=chi2_p, chi2_dof=chi2_dof, chi2_cells=cells,
        qq=qq_arrays(xs, target), pp=pp_arrays(xs, target),
        u_error=u_error, u_error_measured=u_measured,
        moments=moments, tail=tail, notes=notes,
    )


# ---- Anderson-Darling ----------------------------------------------------------------

def anderson_darling_statistic(cdf_sorted, sf_sorted):
    """A² of a fully specified distribution, along the last axis.

    ``cdf_sorted`` holds F(x_(1)) <= ... <= F(x_(n)) and ``sf_sorted`` the matching
    1 - F(x_(i)), evaluated by the model's sf so the upper tail keeps its digits.
    A² = -n - (1/n) Σ (2i-1) [ln F(x_(i)) + ln(1 - F(x_(n+1-i)))]  (Anderson & Darling 1954).
    Probabilities are clipped to the smallest normal double so a draw the model
    calls impossible gives a huge but finite statistic.
    """
    tiny = np.finfo(float).tiny
    lower = np.log(np.clip(np.asarray(cdf_sorted, dtype=float), tiny, 1.0))
    upper = np.log(np.clip(np.asarray(sf_sorted, dtype=float), tiny, 1.0))
    n = lower.shape[-1]
    weights = 2.0 * np.arange(1, n + 1) - 1.0
    return -n - np.sum(weights * (lower + upper[..., ::-1]), axis=-1) / n


def anderson_darling_pvalue(statistic, n=None):
    """P(A² >= statistic) under the model, vectorised over ``statistic``.

    Marsaglia & Marsaglia (2004), J. Stat. Software 9(2): the limiting cdf from
    their series ``ADinf`` (good to about 1e-12) and, when ``n`` is given, their
    ``errfix`` polynomial correction for finite n, itself accurate to about the 5th
    digit: p-values below about 1e-5 are not resolved (far in the tail the
    correction leaves a floor near 6e-4/n). Their short two-piece ``adinf`` is not
    used: checked against the series it is off by up to 2e-5 below A² = 4, and its
    upper piece collapses beyond A² = 8 (7e-6 instead of 1.4e-5 at A² = 10,
    1e-28 instead of 3e-8 at A² = 16).
    """
    z = np.asarray(statistic, dtype=float)
    unique, inverse = np.unique(z.ravel(), return_inverse=True)
    cdf = np.array([_adinf_series(v) for v in unique.tolist()])[inverse].reshape(z.shape)
    tail = 1.0 - cdf
    if n is not None:
        n = sample_size("n", n)
        if n < 1:
            raise ModelError("n", "must be at least 1")
        tail = tail - _errfix(n, cdf)
    p = np.clip(tail, 0.0, 1.0)
    return float(p) if p.ndim == 0 else p


def _adinf_series(z: float) -> float:
    """lim P(A²_n < z): Marsaglia & Marsaglia (2004) ``ADinf``, the series of Anderson & Darling (1952).

    ADinf(z) = (1/z) Σ_j binom(-1/2, j) (4j+1) f(z, j), with f evaluated by the
    two-term recursion of the paper (``ADf``).
    """
    if math.isnan(z):
        return math.nan
    if z < 0.01:
        return 0.0  # ADinf(0.01) = 5.3e-53 (Marsaglia & Marsaglia 2004)
    if z > 40.0:
        return 1.0  # 1 - ADinf(40) is below 1e-15; the inner series would overflow further out
    r = 1.0 / z
    total = r * _adf(z, 0)
    for j in range(1, 100):
        r *= (0.5 - j) / j
        new = total + (4 * j + 1) * r * _adf(z, j)
        if new == total:
            break
        total = new
    return total


def _adf(z: float, j: int) -> float:
    """The paper's ``ADf(z, j)``; 1.2337... = pi²/8, 2.2214... = pi/sqrt(2), 3.9374... = pi^(3/2)/sqrt(2)."""
    t = (4 * j + 1) ** 2 * 1.23370055013617 / z
    if t > 150.0:
        return 0.0
    a = 2.22144146907918 * math.exp(-t) / math.sqrt(t)
    b = 3.93740248643060 * _special.erfc(math.sqrt(t))
    r = z * 0.125
    f = a + b * r
    for i in range(1, 200):
        c = ((i - 0.5 - t) * b + t * a) / i
        a, b = b, c
        r *= z / (8 * i + 8)
        if abs(r) < 1e-40 or abs(c) < 1e-40:
            break
        new = f + c * r
        if new == f:
            break
        f = new
    return f


def _errfix(n: int, x):
    """Marsaglia & Marsaglia (2004) ``errfix(n, x)``: P(A²_n < z) ≈ x + errfix(n, x) for x = ADinf(z)."""
    c = 0.01265 + 0.1757 / n
    t = np.clip(x / c, 0.0, 1.0)
    low = np.sqrt(t) * (1.0 - t) * (49.0 * t - 102.0) * (0.0037 / n**2 + 0.00078 / n + 0.00006) / n
    t = (x - c) / (0.8 - c)
    mid = (-0.00022633 + (6.54034 - (14.6538 - (14.458 - (8.259 - 1.91864 * t) * t) * t) * t) * t) \
        * (0.04213 + 0.01365 / n) / n
    high = (-130.2137 + (745.2337 - (1705.091 - (1950.646 - (1116.360 - 255.7844 * x) * x) * x) * x)
            * x) / n
    return np.where(x > 0.8, high, np.where(x < c, low, mid))


def _anderson_darling_at_atoms(F, S, F_left, S_left, on_atom, gen):
    if on_atom.any():
        # A step cdf makes F(X) non-uniform (and S = 0 at the last atom sends A² to
        # infinity); a uniform draw inside each jump [F(x-), F(x)] restores exact
        # uniformity (randomized quantile residuals, Dunn & Smyth 1996, JCGS 5(3)).
        v = gen.spawn(1)[0].random(int(on_atom.sum()))
        F, S = F.copy(), S.copy()
        F[on_atom] = F_left[on_atom] + v * (F[on_atom] - F_left[on_atom])
        S[on_atom] = S_left[on_atom] - v * (S_left[on_atom] - S[on_atom])
        order = np.argsort(F, kind="stable")
        F, S = F[order], S[order]
    stat = float(anderson_darling_statistic(F, S))
    return stat, anderson_darling_pvalue(stat, F.size)


# ---- Kolmogorov-Smirnov and chi-square -----------------------------------------------

def _kolmogorov_smirnov(xs, target, F, F_left, has_atoms):
    if not has_atoms:
        result = _stats.kstest(xs, target.cdf)
        return float(result.statistic), float(result.pvalue)
    # scipy's D- compares F(x) with F_n(x-), which at an atom counts the whole jump
    # as misfit; sup_t (F(t) - F_n(t)) is reached just left of a sample point,
    # where the model stands at its left limit F(x-).
    n = xs.size
    d_plus = np.max(np.arange(1, n + 1) / n - F)
    d_minus = np.max(F_left - np.arange(n) / n)
    d = float(max(d_plus, d_minus, 0.0))
    return d, float(_stats.kstwo.sf(d, n))


def _chi_square(xs, target, bins):
    """Pearson's chi-square on cells equiprobable under the target, merged to expected >= 5."""
    n = xs.size
    k = bins if bins is not None else max(2, round(2.0 * n ** 0.4))
    k = max(2, min(k, int(n // MIN_EXPECTED)))
    interior = np.asarray(target.quantile(np.arange(1, k) / k), dtype=float)
    # Cells are (a, b]: an atom at an edge belongs to the cell it closes, the same
    # convention as F(b) - F(a), so observed and expected count the same mass.
    edges = np.unique(interior[np.isfinite(interior)])
    cum = np.concatenate(([0.0], np.asarray(target.cdf(edges), dtype=float), [1.0]))
    expected = n * np.diff(cum)
    observed = np.diff(np.concatenate(([0], np.searchsorted(xs, edges, side="right"), [n])))

    ends, acc = [], 0.0
    for i, e in enumerate(expected):  # loops over cells, not draws
        acc += e
        if acc >= MIN_EXPECTED:
            ends.append(i + 1)
            acc = 0.0
    if not ends:
        ends = [expected.size]
    ends[-1] = expected.size  # a short remainder joins the last full cell
    starts = np.array([0] + ends[:-1])
    exp_m = np.add.reduceat(expected, starts)
    obs_m = np.add.reduceat(observed, starts)
    cells = {"edges": edges[np.array(ends[:-1], dtype=int) - 1], "observed": obs_m, "expected": exp_m}
    if exp_m.size < 2:
        return None, None, None, cells
    stat = float(np.sum((obs_m - exp_m) ** 2 / exp_m))
    dof = int(exp_m.size - 1)
    return stat, float(_stats.chi2.sf(stat, dof)), dof, cells


# ---- plots, u-error, moments, tails --------------------------------------------------

def _plot_indices(n: int) -> np.ndarray:
    m = min(n, PLOT_POINTS)
    # Order statistics nearest to the Hazen positions (i - 0.5)/m; all of them when n <= 400.
    return np.clip(np.rint((np.arange(1, m + 1) - 0.5) / m * n - 0.5).astype(int), 0, n - 1)


def qq_arrays(xs_sorted, target) -> dict:
    """At most 400 points: order statistics x_(i) against target.quantile((i - 0.5)/n)."""
    idx = _plot_indices(xs_sorted.size)
    p = (idx + 0.5) / xs_sorted.size
    return {"p": p, "sample": xs_sorted[idx], "model": np.asarray(target.quantile(p), dtype=float)}


def pp_arrays(xs_sorted, target) -> dict:
    """At most 400 points: target.cdf(x_(i)) against the plotting position (i - 0.5)/n."""
    idx = _plot_indices(xs_sorted.size)
    return {"empirical": (idx + 0.5) / xs_sorted.size,
            "model": np.asarray(target.cdf(xs_sorted[idx]), dtype=float)}


def u_grid(size: int = U_GRID_SIZE) -> np.ndarray:
    """Fixed u values in (0, 1): half an even grid, half logit-spaced down to 1e-12 from either end."""
    half = size // 2
    even = (np.arange(half) + 0.5) / half
    reach = math.log(1e12)
    tails = _special.expit(np.linspace(-reach, reach, size - half))
    return np.sort(np.concatenate((even, tails)))


def measure_u_error(quantile, target, u=None) -> float:
    """max over u of the distance from u to [F(Q(u)-), F(Q(u))].

    For a continuous target that is |u - F(Q(u))|. Above u = 0.5 the comparison
    is 1 - u (exact in floating point there) against the target's sf, so the
    upper tail is measured to full relative precision.
    """
    u = u_grid() if u is None else np.asarray(u, dtype=float)
    x = np.asarray(quantile(u), dtype=float)
    F_hi, S_lo = np.asarray(target.cdf(x), dtype=float), np.asarray(target.sf(x), dtype=float)
    F_lo, S_hi = F_hi.copy(), S_lo.copy()
    atoms = _atoms(target)
    if atoms.size:
        on = np.isin(x, atoms)
        left = np.nextafter(x[on], -np.inf)
        F_lo[on], S_hi[on] = target.cdf(left), target.sf(left)
    v = 1.0 - u
    below = np.maximum.reduce([np.zeros_like(u), F_lo - u, u - F_hi])
    above = np.maximum.reduce([np.zeros_like(u), S_lo - v, v - S_hi])
    err = np.where(u < 0.5, below, above)
    return float(np.max(np.where(np.isnan(err), 1.0, err)))


def _moments(xs, target, notes) -> dict:
    n = xs.size
    t_mean = float(target.mean())
    t_var = float(target.var())
    t_sd = math.sqrt(t_var) if math.isfinite(t_var) and t_var >= 0 else None
    t_skew = None
    raw = [float(target.moment(k)) for k in (1, 2, 3)]
    if t_sd and all(math.isfinite(m) for m in raw):
        m1, m2, m3 = raw
        # Third central moment from raw moments: mu3 = m3 - 3 m1 m2 + 2 m1^3.
        t_skew = (m3 - 3.0 * m1 * m2 + 2.0 * m1**3) / t_sd**3
    mean_se = mean_z = None
    s_mean = float(np.mean(xs))
    if not math.isfinite(t_mean):
        notes.append("The target mean is infinite: no z-score for the sample mean.")
    elif t_sd is None:
        notes.append("The target variance is infinite: the sample mean is not asymptotically "
                     "normal, so no z-score for it.")
    elif t_sd > 0:
        # Under the model the standard error of the mean is exactly sd/sqrt(n).
        mean_se = t_sd / math.sqrt(n)
        mean_z = (s_mean - t_mean) / mean_se
    return {
        "sample_mean": s_mean, "sample_sd": float(np.std(xs, ddof=1)),
        "sample_skewness": float(_stats.skew(xs)),
        "target_mean": t_mean, "target_sd": t_sd, "target_skewness": t_skew,
        "mean_se": mean_se, "mean_z": mean_z,
    }


def _tail_mass(xs, target, quantiles) -> list:
    n = xs.size
    thresholds = np.asarray(target.quantile(quantiles), dtype=float)
    # The model's own F(x_q) rather than q: equal for a continuous target, and the
    # right probability at an atom, where P(X <= x_q) exceeds q.
    expected = np.asarray(target.cdf(thresholds), dtype=float)
    observed = np.searchsorted(xs, thresholds, side="right") / n
    rows = []
    for q, x_q, e, o in zip(quantiles, thresholds, expected, observed):
        se = math.sqrt(e * (1.0 - e) / n)
        z = (o - e) / se if se > 0 else (0.0 if o == e else math.inf)
        rows.append({"q": float(q), "threshold": float(x_q), "expected": float(e),
                     "observed": float(o), "se": se, "z": float(z),
                     "normal_ok": bool(n * e * (1.0 - e) >= NORMAL_APPROX_MIN_VARIANCE)})
    return rows


# ---- validation and small helpers ----------------------------------------------------

def _is_sampler(obj) -> bool:
    return not isinstance(obj, np.ndarray) and callable(getattr(obj, "sample", None))


def _require_target(target) -> None:
    missing = [m for m in _TARGET_METHODS if not callable(getattr(target, m, None))]
    if missing:
        raise ModelError("target", f"needs {', '.join(missing)}(); got {type(target).__name__}")


def _validate_samples(raw) -> np.ndarray:
    try:
        x = np.asarray(raw, dtype=float)
    except (TypeError, ValueError):
        raise ModelError("samples", "must be numbers") from None
    if x.ndim != 1:
        raise ModelError("samples", f"must be a 1-D array, got {x.ndim} dimensions")
    if x.size < MIN_SAMPLES:
        raise ModelError("samples", f"need at least {MIN_SAMPLES} values to test a fit, got {x.size}")
    bad = np.count_nonzero(~np.isfinite(x))
    if bad:
        raise ModelError("samples", f"must be finite; {bad} are NaN or infinite")
    return x


def _validate_quantiles(quantiles) -> np.ndarray:
    try:
        q = np.atleast_1d(np.asarray(quantiles, dtype=float))
    except (TypeError, ValueError):
        raise ModelError("quantiles", "must be numbers") from None
    if q.ndim != 1 or not np.all((q > 0) & (q < 1)):
        raise ModelError("quantiles", "must be a list of probabilities strictly between 0 and 1")
    return q


def _atoms(target) -> np.ndarray:
    atoms = np.asarray(getattr(target, "atoms", ()), dtype=float).ravel()
    return atoms[np.isfinite(atoms)]


def _support(target):
    support = getattr(target, "support", None)
    if support is None:
        return -math.inf, math.inf
    lo, hi = support() if callable(support) else support
    return float(lo), float(hi)


def _describe(target) -> str:
    describe = getattr(target, "describe", None)
    return str(describe()) if callable(describe) else type(target).__name__


def _fmt(value, digits: int = 5) -> str:
    if value is None:
        return "-"
    return f"{value:.{digits}g}"


def _jsonable(obj):
    if isinstance(obj, dict):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple, np.ndarray)):
        return [_jsonable(v) for v in (obj.tolist() if isinstance(obj, np.ndarray) else obj)]
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        return float(obj) if math.isfinite(obj) else None
    return obj
