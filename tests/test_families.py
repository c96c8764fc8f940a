"""Specification of the textbook lifetime families (engine.families) against outside references.

References: scipy.stats (weibull_min, expon, lognorm, gamma, norm, fisk, gumbel_l, fatiguelife)
with matching parameters, and closed forms from the NIST/SEMATECH e-Handbook, section 8.1.6.
"""
import math

import numpy as np
import pytest
from scipy import optimize, special, stats

import lifedraw
from lifedraw.engine import ModelError, Target

# Closed forms agree with scipy to a few ulps (measured <= 5e-15 relative), so 1e-12
# leaves room for rounding while catching any wrong term or parameterisation.
RTOL = 1e-12


def rel_err(got, want):
    got, want = np.asarray(got, dtype=float), np.asarray(want, dtype=float)
    return np.max(np.abs(got - want) / np.abs(want))


# (id, engine family, engine parameters, scipy frozen law with the same parameters)
CASES = [
    ("weibull shape<1", "weibull", dict(shape=0.5, scale=100.0), stats.weibull_min(0.5, scale=100.0)),
    ("weibull with location", "weibull", dict(shape=2.5, scale=1000.0, location=50.0),
     stats.weibull_min(2.5, loc=50.0, scale=1000.0)),
    ("exponential with location", "exponential", dict(scale=200.0, location=10.0),
     stats.expon(loc=10.0, scale=200.0)),
    ("lognormal with location", "lognormal", dict(mu=3.0, sigma=0.8, location=5.0),
     stats.lognorm(0.8, loc=5.0, scale=math.exp(3.0))),
    ("gamma shape<1", "gamma", dict(shape=0.4, scale=30.0), stats.gamma(0.4, scale=30.0)),
    ("gamma with location", "gamma", dict(shape=3.5, scale=30.0, location=2.0),
     stats.gamma(3.5, loc=2.0, scale=30.0)),
    ("normal", "normal", dict(mean=100.0, sd=15.0), stats.norm(100.0, 15.0)),
    ("loglogistic", "loglogistic", dict(shape=4.0, scale=50.0), stats.fisk(4.0, scale=50.0)),
    ("smallest extreme value", "smallest_extreme_value", dict(location=100.0, scale=10.0),
     stats.gumbel_l(100.0, 10.0)),
    ("birnbaum-saunders", "birnbaum_saunders", dict(shape=0.5, scale=1000.0),
     stats.fatiguelife(0.5, scale=1000.0)),
]
IDS = [c[0] for c in CASES]

LOWER_U = np.array([1e-12, 1e-9, 1e-6, 1e-3, 0.05, 0.2, 0.5])
UPPER_V = np.array([1e-12, 1e-9, 1e-6, 1e-3, 0.05, 0.2, 0.5])  # upper-tail probabilities


def loglogistic_sf(t, beta, alpha):
    # Closed form R(t) = 1/(1 + (t/alpha)^beta) (Meeker & Escobar 1998, sec. 4.10, from memory).
    # scipy's fisk computes sf as exp(log1p(-cdf)), which loses digits in the upper tail, so the
    # upper tail is checked against the closed form written directly.
    return 1.0 / (1.0 + (t / alpha) ** beta)


def reference_sf(name, dist, t):
    if name == "loglogistic":
        return loglogistic_sf(t, dist.args[0], dist.kwds["scale"])
    return dist.sf(t)


def ages(dist):
    """Ages from the far lower tail through the bulk to the far upper tail."""
    return np.concatenate([dist.ppf(LOWER_U), dist.isf(UPPER_V)])


@pytest.mark.parametrize("case, name, params, dist", CASES, ids=IDS)
def test_pdf_matches_scipy(case, name, params, dist):
    t = ages(dist)
    assert rel_err(lifedraw.family(name, **params).pdf(t), dist.pdf(t)) <= RTOL  # scipy.stats pdf


@pytest.mark.parametrize("case, name, params, dist", CASES, ids=IDS)
def test_cdf_matches_scipy_with_relative_accuracy_in_the_lower_tail(case, name, params, dist):
    t = dist.ppf(LOWER_U)
    assert rel_err(lifedraw.family(name, **params).cdf(t), dist.cdf(t)) <= RTOL  # scipy.stats cdf


@pytest.mark.parametrize("case, name, params, dist", CASES, ids=IDS)
def test_sf_matches_reference_with_relative_accuracy_in_the_upper_tail(case, name, params, dist):
    t = dist.isf(UPPER_V)
    # scipy.stats sf (closed form for the log-logistic, see loglogistic_sf).
    assert rel_err(lifedraw.family(name, **params).sf(t), reference_sf(name, dist, t)) <= RTOL


@pytest.mark.parametrize("case, name, params, dist", CASES, ids=IDS)
def test_hazard_is_pdf_over_sf(case, name, params, dist):
    t = ages(dist)
    # h = f/R (NIST e-Handbook 8.1.2.3), from scipy's pdf and sf.
    assert rel_err(lifedraw.family(name, **params).hazard(t), dist.pdf(t) / reference_sf(name, dist, t)) <= RTOL


@pytest.mark.parametrize("case, name, params, dist", CASES, ids=IDS)
def test_quantile_matches_scipy(case, name, params, dist):
    u = np.concatenate([LOWER_U, [0.7, 0.9, 0.99]])
    assert rel_err(lifedraw.family(name, **params).quantile(u), dist.ppf(u)) <= RTOL  # scipy ppf


@pytest.mark.parametrize("case, name, params, dist", CASES, ids=IDS)
def test_isf_matches_scipy_in_the_far_upper_tail(case, name, params, dist):
    assert rel_err(lifedraw.family(name, **params).isf(UPPER_V), dist.isf(UPPER_V)) <= RTOL  # scipy isf


@pytest.mark.parametrize("case, name, params, dist", CASES, ids=IDS)
def test_quantile_near_one_keeps_the_digits_of_one_minus_u(case, name, params, dist):
    # For u > 1/2, 1 - u is exact in floating point (Sterbenz), so F^-1(u) = isf(1 - u) exactly;
    # scipy's isf of that exact 1 - u is the reference.
    u = 1.0 - UPPER_V[:4]
    assert rel_err(lifedraw.family(name, **params).quantile(u), dist.isf(1.0 - u)) <= RTOL


@pytest.mark.parametrize("case, name, params, dist", CASES, ids=IDS)
def test_mean_matches_scipy(case, name, params, dist):
    assert lifedraw.family(name, **params).mean() == pytest.approx(dist.mean(), rel=RTOL)  # scipy mean


@pytest.mark.parametrize("case, name, params, dist", CASES, ids=IDS)
def test_variance_matches_scipy(case, name, params, dist):
    assert lifedraw.family(name, **params).var() == pytest.approx(dist.var(), rel=RTOL)  # scipy var


@pytest.mark.parametrize("case, name, params, dist", CASES, ids=IDS)
def test_third_raw_moment_matches_scipy(case, name, params, dist):
    assert lifedraw.family(name, **params).moment(3) == pytest.approx(dist.moment(3), rel=RTOL)  # scipy


# Modes in closed form (standard results, from memory; each is the root of f'(t) = 0).
MODES = {
    "weibull shape<1": 0.0,                                    # beta <= 1: density falls from t = gamma
    "weibull with location": 50.0 + 1000.0 * (1.5 / 2.5) ** (1 / 2.5),   # gamma + eta((b-1)/b)^(1/b)
    "exponential with location": 10.0,                         # the location
    "lognormal with location": 5.0 + math.exp(3.0 - 0.8**2),   # gamma + exp(mu - sigma^2)
    "gamma shape<1": 0.0,                                      # k <= 1: pole or maximum at 0
    "gamma with location": 2.0 + (3.5 - 1.0) * 30.0,           # gamma + (k-1)theta
    "normal": 100.0,                                           # the mean
    "loglogistic": 50.0 * (3.0 / 5.0) ** (1 / 4.0),            # alpha((b-1)/(b+1))^(1/b)
    "smallest extreme value": 100.0,                           # mu
}


@pytest.mark.parametrize("case, name, params, dist", [c for c in CASES if c[0] in MODES],
                         ids=[c[0] for c in CASES if c[0] in MODES])
def test_mode_matches_closed_form(case, name, params, dist):
    assert lifedraw.family(name, **params).mode() == pytest.approx(MODES[case], rel=RTOL, abs=1e-12)


def test_birnbaum_saunders_mode_maximises_scipy_density():
    # No simple closed form: maximise scipy's fatiguelife pdf. A maximum is flat, so the argmax
    # is determined only to about sqrt(machine epsilon) ~ 1e-8 relative.
    dist = stats.fatiguelife(0.5, scale=1000.0)
    res = optimize.minimize_scalar(lambda x: -dist.pdf(x), bounds=(500.0, 1000.0), method="bounded",
                                   options=dict(xatol=1e-9))
    mode = lifedraw.family("birnbaum_saunders", shape=0.5, scale=1000.0).mode()
    assert mode == pytest.approx(res.x, rel=1e-7)


@pytest.mark.parametrize("beta, eta", [(0.7, 1500.0), (1.0, 200.0), (3.2, 8000.0)])
def test_weibull_mttf_is_eta_gamma_one_plus_one_over_beta(beta, eta):
    # NIST/SEMATECH e-Handbook 8.1.6.2 (from memory): MTTF = eta·Gamma(1 + 1/beta).
    assert lifedraw.family("weibull", shape=beta, scale=eta).mean() == pytest.approx(
        eta * special.gamma(1 + 1 / beta), rel=RTOL)


@pytest.mark.parametrize("beta, eta", [(0.7, 1500.0), (1.0, 200.0), (3.2, 8000.0)])
def test_weibull_b10_life_is_eta_times_minus_log_point_nine_to_one_over_beta(beta, eta):
    # NIST/SEMATECH e-Handbook 8.1.6.2 (from memory): B10 = eta·(-ln 0.9)^(1/beta).
    assert lifedraw.family("weibull", shape=beta, scale=eta).quantile(0.1) == pytest.approx(
        eta * (-math.log(0.9)) ** (1 / beta), rel=RTOL)


def test_exponential_mttf_is_theta():
    # NIST/SEMATECH e-Handbook 8.1.6.1 (from memory): MTTF = theta = 1/lambda.
    assert lifedraw.family("exponential", scale=437.0).mean() == pytest.approx(437.0, rel=RTOL)


def test_exponential_reliability_is_exp_minus_t_over_theta():
    # NIST/SEMATECH e-Handbook 8.1.6.1 (from memory): R(t) = exp(-t/theta), constant hazard 1/theta.
    t = np.array([0.1, 10.0, 437.0, 5000.0, 20000.0])
    target = lifedraw.family("exponential", scale=437.0)
    assert rel_err(target.sf(t), np.exp(-t / 437.0)) <= RTOL
    assert rel_err(target.hazard(t), np.full(t.size, 1 / 437.0)) <= RTOL


def test_loglogistic_moment_diverges_when_its_order_reaches_the_shape():
    # E[T^k] = alpha^k (k pi/beta)/sin(k pi/beta) for k < beta and infinite for k >= beta
    # (Meeker & Escobar 1998, sec. 4.10, from memory); scipy returns nan there, so the closed form is used.
    target = lifedraw.family("loglogistic", shape=2.5, scale=50.0)
    x = math.pi / 2.5
    assert target.mean() == pytest.approx(50.0 * x / math.sin(x), rel=RTOL)
    assert target.moment(3) == math.inf


def test_location_shifts_the_support_and_puts_no_mass_before_it():
    # A failure-free period gamma: F(t) = 0 for t <= gamma (NIST e-Handbook 8.1.6.2, 3-parameter Weibull).
    target = lifedraw.family("weibull", shape=1.5, scale=100.0, location=40.0)
    assert target.support == (40.0, math.inf)
    assert target.cdf(np.array([0.0, 39.9, 40.0])).tolist() == [0.0, 0.0, 0.0]
    assert target.pdf(39.0) == 0.0


@pytest.mark.parametrize("name, params, dist, t", [
    ("normal", dict(mean=100.0, sd=10.0), stats.norm(100.0, 10.0), 100.0 + 10.0 * 39.0),
    ("lognormal", dict(mu=3.0, sigma=0.5), stats.lognorm(0.5, scale=math.exp(3.0)), math.exp(3.0 + 0.5 * 40.0)),
], ids=["normal", "lognormal"])
def test_hazard_stays_finite_beyond_the_underflow_of_sf(name, params, dist, t):
    # 39-40 standard deviations out R(t) < 1e-308 underflows, but h(t) ~ z/sigma is finite.
    # Reference: exp(logpdf - logsf) from scipy, whose logsf uses log_ndtr (no underflow).
    want = math.exp(dist.logpdf(t) - dist.logsf(t))
    assert lifedraw.family(name, **params).hazard(t) == pytest.approx(want, rel=1e-10)


# ---- bad parameters: a ModelError naming the field ------------------------------------------

def test_unknown_family_names_the_family_field_and_lists_known_ones():
    with pytest.raises(ModelError) as err:
        lifedraw.family("weibul", shape=2.0, scale=1.0)
    assert err.value.field == "family"
    assert "unknown family" in err.value.reason and "weibull" in err.value.reason


def test_missing_parameter_is_named():
    with pytest.raises(ModelError) as err:
        lifedraw.family("weibull", shape=2.0)
    assert err.value.field == "scale"
    assert "required" in err.value.reason


def test_extra_parameter_is_named_with_the_family_parameters():
    with pytest.raises(ModelError) as err:
        lifedraw.family("lognormal", mu=1.0, sigma=0.5, shape=2.0)
    assert err.value.field == "shape"
    assert "not a parameter" in err.value.reason and "sigma" in err.value.reason


@pytest.mark.parametrize("name, params, field", [
    ("weibull", dict(shape=float("nan"), scale=1.0), "shape"),
    ("gamma", dict(shape=2.0, scale=float("nan")), "scale"),
    ("normal", dict(mean=float("nan"), sd=1.0), "mean"),
])
def test_nan_parameter_is_named(name, params, field):
    with pytest.raises(ModelError) as err:
        lifedraw.family(name, **params)
    assert err.value.field == field
    assert "NaN" in err.value.reason


@pytest.mark.parametrize("name, params, field", [
    ("weibull", dict(shape=-1.0, scale=1.0), "shape"),
    ("weibull", dict(shape=2.0, scale=0.0), "scale"),
    ("exponential", dict(scale=-5.0), "scale"),
    ("lognormal", dict(mu=1.0, sigma=-0.1), "sigma"),
    ("gamma", dict(shape=0.0, scale=1.0), "shape"),
    ("normal", dict(mean=10.0, sd=-1.0), "sd"),
    ("loglogistic", dict(shape=2.0, scale=-3.0), "scale"),
    ("smallest_extreme_value", dict(location=1.0, scale=-3.0), "scale"),
    ("birnbaum_saunders", dict(shape=-0.5, scale=3.0), "shape"),
])
def test_non_positive_shape_or_scale_is_named(name, params, field):
    with pytest.raises(ModelError) as err:
        lifedraw.family(name, **params)
    assert err.value.field == field
    assert "> 0" in err.value.reason


def test_infinite_parameter_is_named():
    with pytest.raises(ModelError) as err:
        lifedraw.family("weibull", shape=2.0, scale=math.inf)
    assert err.value.field == "scale"
    assert "finite" in err.value.reason
