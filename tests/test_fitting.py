"""Specifications for engine.fitting: censored maximum-likelihood fits of the textbook families.

References: scipy.stats fits, closed forms (exponential, Weibull information), the NIST/SEMATECH
e-Handbook worked example 8.4.1.3, an independent scipy maximisation, and seeded Monte Carlo.
"""
import math

import numpy as np
import pytest
from scipy import optimize, stats

from lifedraw.engine.errors import ModelError
from lifedraw.engine.families import FamilyTarget
from lifedraw.engine.fitting import fit_family

SEED = 20260611
EULER_GAMMA = 0.5772156649015329

# The same laws in scipy.stats' parameterisation: the reference implementation.
SCIPY_LAW = {
    "weibull": lambda p: stats.weibull_min(p["shape"], scale=p["scale"]),
    "exponential": lambda p: stats.expon(scale=p["scale"]),
    "lognormal": lambda p: stats.lognorm(p["sigma"], scale=math.exp(p["mu"])),
    "gamma": lambda p: stats.gamma(p["shape"], scale=p["scale"]),
    "normal": lambda p: stats.norm(p["mean"], p["sd"]),
    "loglogistic": lambda p: stats.fisk(p["shape"], scale=p["scale"]),
    "smallest_extreme_value": lambda p: stats.gumbel_l(p["location"], p["scale"]),
    "birnbaum_saunders": lambda p: stats.fatiguelife(p["shape"], scale=p["scale"]),
}

TRUE_PARAMS = {
    "weibull": {"shape": 1.8, "scale": 300.0},
    "exponential": {"scale": 200.0},
    "lognormal": {"mu": 5.0, "sigma": 0.6},
    "gamma": {"shape": 2.5, "scale": 80.0},
    "normal": {"mean": 500.0, "sd": 60.0},
    "loglogistic": {"shape": 3.0, "scale": 150.0},
    "smallest_extreme_value": {"location": 1000.0, "scale": 80.0},
    "birnbaum_saunders": {"shape": 0.5, "scale": 400.0},
}
ESTIMATED = {name: list(p) for name, p in TRUE_PARAMS.items()}
POSITIVE = {"shape", "scale", "sigma", "sd"}


def tight_fmin(func, x0, args=(), disp=0):
    # scipy's generic fit uses fmin with xtol = ftol = 1e-4; a tighter fmin makes it a sharper reference.
    return optimize.fmin(func, x0, args=args, xtol=1e-12, ftol=1e-14, maxiter=40000, maxfun=40000, disp=0)


def _shape_scale(fitted):
    shape, _, scale = fitted
    return {"shape": shape, "scale": scale}


def _lognormal(fitted):
    sigma, _, scale = fitted
    return {"mu": math.log(scale), "sigma": sigma}


# scipy.stats' own MLE for complete samples, mapped to our parameter names (floc=0 where our
# family holds the location at 0).
SCIPY_FIT = {
    "weibull": lambda x: _shape_scale(stats.weibull_min.fit(x, floc=0)),
    "lognormal": lambda x: _lognormal(stats.lognorm.fit(x, floc=0)),
    "gamma": lambda x: _shape_scale(stats.gamma.fit(x, floc=0)),
    "normal": lambda x: dict(zip(["mean", "sd"], stats.norm.fit(x))),
    "loglogistic": lambda x: _shape_scale(stats.fisk.fit(x, floc=0, optimizer=tight_fmin)),
    "smallest_extreme_value": lambda x: dict(zip(["location", "scale"], stats.gumbel_l.fit(x))),
    "birnbaum_saunders": lambda x: _shape_scale(stats.fatiguelife.fit(x, floc=0, optimizer=tight_fmin)),
}


def draw(name, n, rng):
    return SCIPY_LAW[name](TRUE_PARAMS[name]).rvs(size=n, random_state=rng)


def censored_sample(name, n, rng):
    """Random right censoring: each unit is removed at a uniform age up to 2.5 median lives."""
    life = draw(name, n, rng)
    median = SCIPY_LAW[name](TRUE_PARAMS[name]).median()
    removal = rng.uniform(0.3, 2.5, n) * median
    return np.minimum(life, removal), life > removal


def scipy_loglik(name, params, t, censored):
    law = SCIPY_LAW[name](params)
    return law.logpdf(t[~censored]).sum() + law.logsf(t[censored]).sum()


def independent_censored_mle(name, t, censored):
    """A second implementation: Nelder-Mead on scipy.stats logpdf/logsf, log of positive parameters.

    It starts from scipy's complete-sample fit that ignores the censoring, so it shares
    nothing with engine.fitting but the data.
    """
    names = ESTIMATED[name]
    start = SCIPY_FIT[name](t) if name in SCIPY_FIT else {"scale": float(np.mean(t))}

    def unpack(u):
        return {k: (math.exp(v) if k in POSITIVE else v) for k, v in zip(names, u)}

    def objective(u):
        value = -scipy_loglik(name, unpack(u), t, censored)
        return value if np.isfinite(value) else 1e300

    u = np.array([math.log(start[k]) if k in POSITIVE else start[k] for k in names])
    for _ in range(3):  # restarts shake Nelder-Mead out of a collapsed simplex
        res = optimize.minimize(objective, u, method="Nelder-Mead",
                                options=dict(xatol=1e-11, fatol=1e-13, maxiter=40000, maxfev=40000))
        u = res.x
    return unpack(u), -res.fun


def estimates(model):
    return {k: model.params[k] for k in model.fit_info["parameters"]}


# ---- complete samples: scipy.stats' fit and closed forms ------------------------------------
@pytest.mark.parametrize("name", sorted(SCIPY_FIT))
def test_complete_sample_mle_equals_scipy_fit(name):
    # Reference: scipy.stats <dist>.fit (floc=0 for families whose location we hold at 0).
    # Tolerance 1e-5 relative: both are iterative; they agree to ~1e-7 here.
    x = draw(name, 200, np.random.default_rng(SEED))
    got = estimates(fit_family(name, x))
    ref = SCIPY_FIT[name](x)
    for key in ESTIMATED[name]:
        assert got[key] == pytest.approx(ref[key], rel=1e-5), key


def test_exponential_complete_sample_mle_is_the_sample_mean():
    # Closed form: theta_hat = sum t / n (NIST e-Handbook 8.4.1.1; any textbook).
    x = draw("exponential", 150, np.random.default_rng(SEED))
    assert fit_family("exponential", x).params["scale"] == pytest.approx(np.mean(x), rel=1e-12)


def test_censored_exponential_mle_is_total_time_on_test_over_failures():
    # Closed form: theta_hat = (total time on test) / (number of failures), NIST e-Handbook 8.4.1.1.
    t, c = censored_sample("exponential", 120, np.random.default_rng(SEED))
    assert 20 < c.sum() < 100  # a real mix of failures and suspensions
    model = fit_family("exponential", t, c)
    assert model.params["scale"] == pytest.approx(t.sum() / (~c).sum(), rel=1e-12)


# ---- a published worked example --------------------------------------------------------------
# NIST/SEMATECH e-Handbook of Statistical Methods, 8.4.1.3 ("A Weibull maximum likelihood
# estimation example"; data from 8.2.2.1): 20 units, 10 failures at the ages below, 10 units
# removed unfailed at 500 hours. Found with the search tool at
# https://www.itl.nist.gov/div898/handbook/apr/section4/apr413.htm
NIST_FAILURES = [54, 187, 216, 240, 244, 335, 361, 373, 375, 386]
NIST_TIMES = np.array(NIST_FAILURES + [500] * 10, dtype=float)
NIST_CENSORED = np.array([False] * 10 + [True] * 10)


def test_nist_weibull_example_estimates():
    # Published: eta_hat = 606.5280, beta_hat = 1.7208. The exact root of the likelihood
    # equations is eta = 606.52756: it differs from the printed figure in the 7th digit
    # (the publishing software's stopping tolerance), so the tolerance is 1e-6 relative.
    model = fit_family("weibull", NIST_TIMES, NIST_CENSORED)
    assert model.params["scale"] == pytest.approx(606.5280, rel=1e-6)
    assert model.params["shape"] == pytest.approx(1.7208, abs=5e-5)  # printed to 4 decimals


def test_nist_weibull_example_loglik_and_aic():
    # Published: log-likelihood -75.135 and AIC 154.27 (rounded to the digits shown).
    info = fit_family("weibull", NIST_TIMES, NIST_CENSORED).fit_info
    assert info["loglik"] == pytest.approx(-75.135, abs=5e-4)
    assert info["aic"] == pytest.approx(154.27, abs=5e-3)


def test_nist_example_lognormal_aic():
    # Same page: "Lognormal AIC 154.39" for the same data.
    info = fit_family("lognormal", NIST_TIMES, NIST_CENSORED).fit_info
    assert info["aic"] == pytest.approx(154.39, abs=5e-3)


# ---- censored data against an independent implementation ------------------------------------
@pytest.mark.parametrize("name", sorted(TRUE_PARAMS))
def test_censored_mle_matches_independent_maximisation(name):
    # Reference: independent_censored_mle (scipy.stats logpdf/logsf + Nelder-Mead).
    # Tolerance 1e-4 relative on parameters (Nelder-Mead's precision); the log-likelihood
    # reached must be at least as high as the reference's, to rounding.
    t, c = censored_sample(name, 80, np.random.default_rng(SEED + 1))
    assert 10 < c.sum() < 50
    model = fit_family(name, t, c)
    ref, ref_loglik = independent_censored_mle(name, t, c)
    for key in ESTIMATED[name]:
        assert model.params[key] == pytest.approx(ref[key], rel=1e-4, abs=1e-8), key
    assert model.fit_info["loglik"] >= ref_loglik - 1e-7
    assert model.fit_info["converged"]


def test_censored_weibull_converges_with_three_failures_among_many_suspensions():
    # Hard data: 3 failures, 47 suspensions. Reference: the independent scipy maximisation.
    rng = np.random.default_rng(SEED + 2)
    life = stats.weibull_min(0.8, scale=5000.0).rvs(size=50, random_state=rng)
    cutoff = np.sort(life)[2] * 1.0001  # type II censoring just after the third failure
    t, c = np.minimum(life, cutoff), life > cutoff
    assert (~c).sum() == 3
    model = fit_family("weibull", t, c)
    ref, _ = independent_censored_mle("weibull", t, c)
    assert model.fit_info["converged"]
    assert model.params["shape"] == pytest.approx(ref["shape"], rel=1e-4)
    assert model.params["scale"] == pytest.approx(ref["scale"], rel=1e-4)


@pytest.mark.parametrize("name", sorted(TRUE_PARAMS))
def test_loglik_is_log_density_of_failures_plus_log_survival_of_suspensions(name):
    # Meeker & Escobar (1998) ch. 7 / NIST 8.4.1.2, evaluated with scipy.stats at the estimates.
    t, c = censored_sample(name, 60, np.random.default_rng(SEED + 3))
    model = fit_family(name, t, c)
    assert model.fit_info["loglik"] == pytest.approx(scipy_loglik(name, model.params, t, c), rel=1e-10)


def test_weibull_location_is_held_fixed_not_estimated():
    # Reference: scipy.stats.weibull_min.fit(x, floc=120) with the same fixed threshold.
    x = 120.0 + draw("weibull", 150, np.random.default_rng(SEED + 4))
    model = fit_family("weibull", x, location=120.0)
    shape, loc, scale = stats.weibull_min.fit(x, floc=120.0)
    assert model.params["location"] == 120.0
    assert model.fit_info["parameters"] == ["shape", "scale"]
    assert model.params["shape"] == pytest.approx(shape, rel=1e-5)
    assert model.params["scale"] == pytest.approx(scale, rel=1e-5)


@pytest.mark.parametrize("name, k", [("exponential", 1), ("weibull", 2), ("normal", 2)])
def test_aic_counts_only_estimated_parameters(name, k):
    # AIC = 2k - 2 log L (Akaike 1974); a location held fixed is not counted.
    t, c = censored_sample(name, 60, np.random.default_rng(SEED + 5))
    info = fit_family(name, t, c).fit_info
    assert info["aic"] == pytest.approx(2 * k - 2 * info["loglik"], rel=1e-12)


def test_fit_reports_counts_method_and_a_family_target():
    t, c = censored_sample("gamma", 70, np.random.default_rng(SEED + 6))
    model = fit_family("gamma", t, c, confidence=0.9)
    assert isinstance(model, FamilyTarget)
    info = model.fit_info
    assert (info["n_failures"], info["n_suspensions"]) == ((~c).sum(), c.sum())
    assert info["method"] == "censored maximum likelihood"
    assert info["confidence"] == 0.9
    assert set(info["standard_errors"]) == set(info["bounds"]) == {"shape", "scale"}


# ---- standard errors and intervals ------------------------------------------------------------
def test_exponential_standard_error_complete_sample_is_theta_over_root_n():
    # Closed form: observed information n/theta^2 at theta_hat, so se = theta/sqrt(n)
    # (Meeker & Escobar 1998, ch. 7). Tolerance 1e-6: numerical second derivative.
    x = draw("exponential", 150, np.random.default_rng(SEED + 7))
    model = fit_family("exponential", x)
    theta = model.params["scale"]
    assert model.fit_info["standard_errors"]["scale"] == pytest.approx(theta / math.sqrt(150), rel=1e-6)


def test_exponential_standard_error_censored_is_theta_over_root_failures():
    # Closed form: observed information r/theta^2 at theta_hat with r failures (same section).
    t, c = censored_sample("exponential", 120, np.random.default_rng(SEED + 8))
    model = fit_family("exponential", t, c)
    r = (~c).sum()
    assert model.fit_info["standard_errors"]["scale"] == pytest.approx(model.params["scale"] / math.sqrt(r),
                                                                       rel=1e-6)


def weibull_observed_information(beta, eta, t, censored):
    """-d2 log L for the censored Weibull, differentiated by hand from
    log L = r ln b - r b ln eta + (b - 1) sum_fail ln t - sum_all (t/eta)^b  (NIST 8.4.1.2)."""
    r = (~censored).sum()
    u = t / eta
    s, lu = u**beta, np.log(u)
    d_bb = -r / beta**2 - np.sum(s * lu * lu)
    d_ee = r * beta / eta**2 - beta * (beta + 1) / eta**2 * np.sum(s)
    d_be = -r / eta + np.sum(s) / eta + beta / eta * np.sum(s * lu)
    return -np.array([[d_bb, d_be], [d_be, d_ee]])


def test_weibull_covariance_is_inverse_of_closed_form_observed_information():
    # Reference: the analytic second derivatives above, inverted. Tolerance 1e-4 relative:
    # the engine differentiates numerically.
    t, c = censored_sample("weibull", 80, np.random.default_rng(SEED + 9))
    model = fit_family("weibull", t, c)
    beta, eta = model.params["shape"], model.params["scale"]
    expected = np.linalg.inv(weibull_observed_information(beta, eta, t, c))
    assert model.fit_info["parameters"] == ["shape", "scale"]
    np.testing.assert_allclose(np.array(model.fit_info["covariance"]), expected, rtol=1e-4)


def test_weibull_standard_errors_approach_inverse_fisher_information():
    # Complete samples, inverse expected information (from memory: Cohen 1965, Technometrics 7;
    # the constants follow from the extreme-value information matrix, Meeker & Escobar 1998):
    # Var(beta) = 6 beta^2 / (pi^2 n), Var(eta) = (1 + 6 (1 - gamma_E)^2 / pi^2) eta^2 / (beta^2 n).
    # Observed and expected information differ by O(n^-1/2); at n = 20000 the gap is a few
    # tenths of a percent, so the tolerance is 2%.
    n = 20000
    x = draw("weibull", n, np.random.default_rng(SEED + 10))
    model = fit_family("weibull", x)
    beta, eta = model.params["shape"], model.params["scale"]
    se = model.fit_info["standard_errors"]
    assert se["shape"] == pytest.approx(math.sqrt(6 / math.pi**2 / n) * beta, rel=0.02)
    c_eta = 1 + 6 * (1 - EULER_GAMMA) ** 2 / math.pi**2
    assert se["scale"] == pytest.approx(math.sqrt(c_eta / n) * eta / beta, rel=0.02)


def test_bounds_of_positive_parameters_are_wald_intervals_on_the_log_scale():
    # Meeker & Escobar (1998) sec. 8.4: [theta / w, theta * w], w = exp(z se / theta),
    # with z the two-sided normal quantile from scipy.stats.norm.
    t, c = censored_sample("weibull", 80, np.random.default_rng(SEED + 11))
    model = fit_family("weibull", t, c, confidence=0.90)
    z = stats.norm.ppf(0.95)
    for key in ("shape", "scale"):
        theta, se = model.params[key], model.fit_info["standard_errors"][key]
        w = math.exp(z * se / theta)
        assert model.fit_info["bounds"][key] == pytest.approx((theta / w, theta * w), rel=1e-12)


def test_bounds_of_real_parameters_are_symmetric_wald_intervals():
    # Wald interval theta +- z se for a parameter that may be negative (the normal mean).
    t, c = censored_sample("normal", 80, np.random.default_rng(SEED + 12))
    model = fit_family("normal", t, c)
    z = stats.norm.ppf(0.975)
    mean, se = model.params["mean"], model.fit_info["standard_errors"]["mean"]
    assert model.fit_info["bounds"]["mean"] == pytest.approx((mean - z * se, mean + z * se), rel=1e-12)


# ---- coverage ---------------------------------------------------------------------------------
def weibull_interval_coverage(key, reps=1000, n=60):
    """Share of 95% intervals covering the truth: Weibull(2, 100), type I censored at its
    70% quantile (about 30% suspensions)."""
    beta, eta = 2.0, 100.0
    cutoff = stats.weibull_min(beta, scale=eta).ppf(0.7)
    rng = np.random.default_rng(SEED + 13)
    truth = {"shape": beta, "scale": eta}[key]
    hits = 0
    for life in eta * rng.weibull(beta, (reps, n)):
        lo, hi = fit_family("weibull", np.minimum(life, cutoff), life > cutoff).fit_info["bounds"][key]
        hits += lo <= truth <= hi
    return hits / reps


def test_weibull_shape_interval_covers_the_truth_at_about_95_percent():
    # 1000 replicates: binomial sd 0.007; Wald intervals at n = 60 may undercover slightly
    # (Meeker & Escobar 8.4). Accept [0.925, 0.975], about +-3.5 sd.
    assert 0.925 <= weibull_interval_coverage("shape") <= 0.975


def test_weibull_scale_interval_covers_the_truth_at_about_95_percent():
    # Same design and tolerance as for the shape.
    assert 0.925 <= weibull_interval_coverage("scale") <= 0.975


# ---- bad input --------------------------------------------------------------------------------
def raises(field, match, *args, **kwargs):
    with pytest.raises(ModelError, match=match) as info:
        fit_family(*args, **kwargs)
    assert info.value.field == field
    return info.value


def test_empty_times_are_rejected():
    raises("times", "no data", "weibull", [])


def test_non_finite_time_is_rejected_with_its_row():
    raises("times", r"value nan \(row 2\) is not a finite number", "weibull", [5.0, float("nan"), 7.0])


def test_negative_time_is_rejected_with_its_row():
    raises("times", r"value -3 \(row 4\) is negative", "weibull", [5.0, 6.0, 7.0, -3.0])


def test_zero_time_is_rejected_with_its_row():
    raises("times", r"row 1\) is zero", "lognormal", [0.0, 6.0, 7.0])


def test_censored_flags_must_match_the_times():
    raises("censored", "2 flags for 3 times", "weibull", [5.0, 6.0, 7.0], [True, False])


def test_all_suspensions_are_rejected():
    raises("censored", "every unit is a suspension; at least one failure is needed",
           "exponential", [5.0, 6.0, 7.0], [True, True, True])


def test_fewer_failures_than_parameters_is_rejected():
    raises("censored", "estimates 2 parameters .* only 1 failure", "weibull",
           [5.0, 6.0, 7.0], [False, True, True])


def test_unknown_family_is_rejected():
    raises("family", "unknown family", "rayleighish", [5.0, 6.0, 7.0])


def test_location_at_or_above_the_smallest_time_is_rejected():
    raises("location", r"must be below the smallest time \(5\)", "weibull", [5.0, 6.0, 7.0], location=5.0)


def test_location_for_a_family_without_a_failure_free_period_is_rejected():
    raises("location", "no failure-free period", "normal", [5.0, 6.0, 7.0], location=1.0)


def test_confidence_outside_zero_one_is_rejected():
    raises("confidence", "strictly between 0 and 1", "weibull", [5.0, 6.0, 7.0], confidence=95)


def test_identical_failures_with_no_later_suspension_are_rejected():
    # The Weibull likelihood rises without bound as the shape grows (no spread to estimate).
    raises("times", "same age", "weibull", [5.0, 5.0, 5.0, 4.0], [False, False, False, True])


def test_a_likelihood_without_a_maximum_is_reported_not_returned():
    # 4 failures and 42 units removed at 260 h. For the Birnbaum-Saunders family the
    # profile log-likelihood (maximised over the scale with scipy.stats.fatiguelife) keeps
    # rising as the shape grows, so no maximum exists; the fit must say so.
    t = np.array([0.94171746, 43.85768559, 77.60036489, 238.51490386] + [260.05311302] * 42)
    c = np.array([False] * 4 + [True] * 42)
    profile = []
    for shape in (10.0, 100.0, 1000.0):
        best = optimize.minimize_scalar(
            lambda log_scale: -scipy_loglik("birnbaum_saunders",
                                            {"shape": shape, "scale": math.exp(log_scale)}, t, c),
            bounds=(0.0, 40.0), method="bounded", options=dict(xatol=1e-10))
        profile.append(-best.fun)
    assert profile[0] < profile[1] < profile[2]
    raises("times", "no maximum", "birnbaum_saunders", t, c)
    assert fit_family("weibull", t, c).fit_info["converged"]  # the data themselves are fine
