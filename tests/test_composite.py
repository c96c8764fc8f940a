"""Specification of composed targets: mixtures, competing failure modes and residual life.

References: scipy.stats components combined by the NIST/SEMATECH e-Handbook formulas
(8.1.6.6 competing risks: R = product, h = sum; 8.1.6.7 mixtures; 8.1.2.4 conditional reliability).
"""
import math

import numpy as np
import pytest
from scipy import optimize, stats

import lifedraw
from lifedraw.engine import ModelError, Target

# Sums and products of closed forms: a few ulps each (measured <= 1e-14 relative).
RTOL = 1e-12


def rel_err(got, want):
    got, want = np.asarray(got, dtype=float), np.asarray(want, dtype=float)
    return np.max(np.abs(got - want) / np.abs(want))


# ---- mixtures (NIST e-Handbook 8.1.6.7): f = sum w_i f_i, F = sum w_i F_i ------------------

WEIGHTS_GIVEN = [2.0, 5.0, 3.0]
WEIGHTS = np.array(WEIGHTS_GIVEN) / 10.0
SCIPY_PARTS = [stats.weibull_min(0.6, scale=50.0), stats.lognorm(0.3, scale=math.exp(5.0)),
               stats.gamma(9.0, scale=40.0)]


def mixture():
    return lifedraw.mixture([lifedraw.family("weibull", shape=0.6, scale=50.0),
                           lifedraw.family("lognormal", mu=5.0, sigma=0.3),
                           lifedraw.family("gamma", shape=9.0, scale=40.0)], WEIGHTS_GIVEN)


def weighted(fn, t):
    return sum(w * getattr(d, fn)(t) for w, d in zip(WEIGHTS, SCIPY_PARTS))


MIX_AGES = np.logspace(-6, 3.6, 60)


def test_mixture_weights_are_normalised_to_sum_to_one():
    assert mixture().weights.tolist() == pytest.approx(WEIGHTS.tolist(), rel=1e-15)


@pytest.mark.parametrize("fn", ["pdf", "cdf", "sf"])
def test_mixture_functions_are_weighted_sums_of_scipy_components(fn):
    assert rel_err(getattr(mixture(), fn)(MIX_AGES), weighted(fn, MIX_AGES)) <= RTOL


def test_mixture_hazard_is_mixture_pdf_over_mixture_sf():
    # The hazard of a mixture is not the weighted sum of hazards: h = sum w f_i / sum w R_i.
    assert rel_err(mixture().hazard(MIX_AGES), weighted("pdf", MIX_AGES) / weighted("sf", MIX_AGES)) <= RTOL


def test_mixture_mean_is_the_weighted_mean_of_component_means():
    want = sum(w * d.mean() for w, d in zip(WEIGHTS, SCIPY_PARTS))
    assert mixture().mean() == pytest.approx(want, rel=RTOL)


def test_mixture_variance_follows_from_the_weighted_second_moments():
    m1 = sum(w * d.mean() for w, d in zip(WEIGHTS, SCIPY_PARTS))
    m2 = sum(w * d.moment(2) for w, d in zip(WEIGHTS, SCIPY_PARTS))
    assert mixture().var() == pytest.approx(m2 - m1 * m1, rel=1e-10)


def test_mixture_quantile_inverts_the_weighted_cdf_in_both_tails():
    u = np.array([1e-10, 1e-4, 0.3, 0.7, 1 - 1e-4, 1 - 1e-10])
    x = mixture().quantile(u)
    # Checked in probability, lower half by F and upper half by R = 1 - F (exact 1 - u, Sterbenz).
    err = np.where(u < 0.5, np.abs(weighted("cdf", x) - u) / u, np.abs(weighted("sf", x) - (1 - u)) / (1 - u))
    assert np.max(err) <= 1e-12


# ---- competing failure modes (NIST e-Handbook 8.1.6.6): R = prod R_i, h = sum h_i ----------

def test_competing_reliability_is_the_product_and_hazard_the_sum():
    modes = [lifedraw.family("weibull", shape=0.8, scale=3000.0), lifedraw.family("lognormal", mu=7.0, sigma=0.6),
             lifedraw.family("gamma", shape=4.0, scale=400.0)]
    refs = [stats.weibull_min(0.8, scale=3000.0), stats.lognorm(0.6, scale=math.exp(7.0)),
            stats.gamma(4.0, scale=400.0)]
    target = lifedraw.competing(modes)
    t = np.logspace(-3, 3.8, 50)
    assert rel_err(target.sf(t), np.prod([d.sf(t) for d in refs], axis=0)) <= RTOL
    assert rel_err(target.hazard(t), sum(d.pdf(t) / d.sf(t) for d in refs)) <= RTOL
    # f = h·R.
    want_pdf = sum(d.pdf(t) / d.sf(t) for d in refs) * np.prod([d.sf(t) for d in refs], axis=0)
    assert rel_err(target.pdf(t), want_pdf) <= RTOL


THETAS = [100.0, 300.0, 50.0]
SUMMED = stats.expon(scale=1.0 / sum(1.0 / th for th in THETAS))   # rates add (NIST 8.1.6.6)


def competing_exponentials():
    return lifedraw.competing([lifedraw.family("exponential", scale=th) for th in THETAS])


def test_competing_exponentials_are_one_exponential_with_the_summed_rate():
    target = competing_exponentials()
    t = SUMMED.ppf(np.array([1e-3, 0.1, 0.5, 0.9])).tolist() + SUMMED.isf(np.array([1e-6, 1e-12])).tolist()
    t = np.array(t)
    assert rel_err(target.sf(t), SUMMED.sf(t)) <= RTOL
    assert rel_err(target.pdf(t), SUMMED.pdf(t)) <= RTOL
    assert rel_err(target.hazard(t), np.full(t.size, 1.0 / SUMMED.mean())) <= RTOL
    assert rel_err(target.cdf(t[:4]), SUMMED.cdf(t[:4])) <= RTOL
    assert target.mean() == pytest.approx(SUMMED.mean(), rel=1e-10)


def test_competing_cdf_keeps_relative_digits_in_the_lower_tail():
    # Small failure probabilities (B-lives such as B0.0001) need F with relative, not absolute, accuracy.
    t = SUMMED.ppf(np.array([1e-9, 1e-6]))
    assert rel_err(competing_exponentials().cdf(t), SUMMED.cdf(t)) <= RTOL


def test_competing_weibulls_of_equal_shape_are_one_weibull():
    # sum (t/eta_i)^b = (t/eta)^b with eta = (sum eta_i^-b)^(-1/b) (closed form, from the product of R_i).
    b, etas = 2.2, [100.0, 150.0, 400.0]
    eta = sum(e**-b for e in etas) ** (-1.0 / b)
    ref = stats.weibull_min(b, scale=eta)
    target = lifedraw.competing([lifedraw.family("weibull", shape=b, scale=e) for e in etas])
    t = ref.ppf(np.array([1e-3, 0.1, 0.5, 0.9, 1 - 1e-6]))
    assert rel_err(target.sf(t), ref.sf(t)) <= RTOL
    assert rel_err(target.pdf(t), ref.pdf(t)) <= RTOL
    assert rel_err(target.hazard(t), ref.pdf(t) / ref.sf(t)) <= RTOL
    u = np.array([1e-3, 0.5, 1 - 1e-9])
    assert rel_err(target.quantile(u), np.where(u > 0.5, ref.isf(1 - u), ref.ppf(u))) <= 1e-10
    assert target.mean() == pytest.approx(ref.mean(), rel=1e-10)


def test_competing_support_ends_with_the_first_mode_to_end():
    target = lifedraw.competing([lifedraw.binned_counts([0.0, 10.0, 20.0], [1, 1]),
                               lifedraw.family("exponential", scale=5.0)])
    assert target.support == (0.0, 20.0)


# ---- residual life (NIST e-Handbook 8.1.2.4): R_X(x) = R(a + x)/R(a) -----------------------

def test_residual_reliability_is_the_conditional_reliability():
    base = stats.weibull_min(2.5, scale=100.0)
    target = lifedraw.family("weibull", shape=2.5, scale=100.0).given_survival(150.0)
    x = np.array([1e-3, 1.0, 10.0, 50.0, 100.0])
    assert rel_err(target.sf(x), base.sf(150.0 + x) / base.sf(150.0)) <= RTOL
    assert rel_err(target.pdf(x), base.pdf(150.0 + x) / base.sf(150.0)) <= RTOL
    # The hazard of the remaining life is the base hazard at the unit's age.
    assert rel_err(target.hazard(x), base.pdf(150.0 + x) / base.sf(150.0 + x)) <= RTOL


@pytest.mark.parametrize("age", [0.0, 25.0, 250.0, 2000.0])
def test_residual_life_of_an_exponential_is_the_same_exponential(age):
    # Memorylessness (NIST e-Handbook 8.1.6.1): P(T > a + x | T > a) = exp(-x/theta).
    ref = stats.expon(scale=100.0)
    target = lifedraw.family("exponential", scale=100.0).given_survival(age)
    x = ref.ppf(np.array([1e-3, 0.1, 0.5, 0.9])).tolist() + ref.isf(np.array([1e-6, 1e-12])).tolist()
    x = np.array(x)
    assert target.support == (0.0, math.inf)
    assert rel_err(target.sf(x), ref.sf(x)) <= RTOL
    assert rel_err(target.pdf(x), ref.pdf(x)) <= RTOL
    # F_X = 1 - R_X is checked in absolute probability here; its relative accuracy for small
    # F_X is the subject of test_residual_lower_tail_keeps_relative_digits.
    assert np.max(np.abs(target.cdf(x[:4]) - ref.cdf(x[:4]))) <= 1e-14
    u = np.array([0.1, 0.3, 0.7, 1 - 1e-9])
    assert rel_err(target.quantile(u), np.where(u > 0.5, ref.isf(1 - u), ref.ppf(u))) <= 1e-12
    assert target.mean() == pytest.approx(100.0, rel=1e-10)


def weibull_residual_quantile(u, a, b, eta):
    # Solving exp(-((a+x)/eta)^b + (a/eta)^b) = 1 - u for x, written without cancellation:
    # x = a·((1 - ln(1-u)/(a/eta)^b)^(1/b) - 1) = a·expm1(log1p(-log1p(-u)/(a/eta)^b)/b).
    return a * np.expm1(np.log1p(-np.log1p(-u) / (a / eta) ** b) / b)


def test_weibull_residual_quantile_matches_a_direct_solve():
    a, b, eta = 150.0, 2.5, 100.0
    base = stats.weibull_min(b, scale=eta)
    target = lifedraw.family("weibull", shape=b, scale=eta).given_survival(a)
    u = np.array([1e-3, 0.05, 0.3, 0.5, 0.7, 0.95])
    # Direct solve of the conditional reliability R(a + x)/R(a) = 1 - u with scipy's Weibull sf.
    direct = np.array([optimize.brentq(lambda x: base.sf(a + x) / base.sf(a) - (1 - ui), 0.0, 500.0,
                                       xtol=1e-300, rtol=4 * np.finfo(float).eps) for ui in u])
    assert rel_err(target.quantile(u), direct) <= 1e-12
    assert rel_err(weibull_residual_quantile(u, a, b, eta), direct) <= 1e-12   # the closed form agrees


def test_weibull_residual_quantile_keeps_its_digits_in_the_upper_tail():
    a, b, eta = 150.0, 2.5, 100.0
    target = lifedraw.family("weibull", shape=b, scale=eta).given_survival(a)
    u = 1.0 - np.array([1e-3, 1e-6, 1e-9, 1e-12])
    assert rel_err(target.quantile(u), weibull_residual_quantile(u, a, b, eta)) <= 1e-12


def test_residual_lower_tail_keeps_relative_digits():
    # The chance of failing soon after inspection (u down to 1e-9) with relative accuracy:
    # F_X(x) = (1/R(a))·integral of f(a + s) ds over (0, x) has no cancellation.
    a, b, eta = 150.0, 2.5, 100.0
    target = lifedraw.family("weibull", shape=b, scale=eta).given_survival(a)
    u = np.array([1e-9, 1e-6, 1e-3])
    x = weibull_residual_quantile(u, a, b, eta)
    assert rel_err(target.quantile(u), x) <= 1e-10
    assert rel_err(target.cdf(x), u) <= 1e-10


def test_residual_at_an_old_age_keeps_relative_digits():
    # Memorylessness at age 2000 = 20 mean lives (R(a) = 2e-9): F_X(x) = 1 - exp(-x/theta) exactly,
    # to 1e-12 relative, as the base exponential itself gives.
    old = lifedraw.family("exponential", scale=100.0).given_survival(2000.0)
    u = np.array([1e-9, 1e-6, 1e-3, 0.01])
    x = stats.expon(scale=100.0).ppf(u)
    assert rel_err(old.cdf(x), u) <= 1e-12
    assert rel_err(old.quantile(u), x) <= 1e-12


def test_residual_of_a_normal_life_starts_at_zero_remaining_life():
    # Remaining life is >= 0 even when the base law's support reaches below the age.
    base = stats.norm(100.0, 10.0)
    target = lifedraw.family("normal", mean=100.0, sd=10.0).given_survival(50.0)
    assert target.support == (0.0, math.inf)
    x = np.array([1.0, 50.0, 80.0])
    assert rel_err(target.sf(x), base.sf(50.0 + x) / base.sf(50.0)) <= RTOL


# ---- bad compositions ------------------------------------------------------------------------

def test_residual_age_where_reliability_underflows_is_rejected():
    with pytest.raises(ModelError) as err:
        lifedraw.family("weibull", shape=2.5, scale=100.0).given_survival(3000.0)   # R = exp(-3.1e3) = 0
    assert err.value.field == "age"
    assert "underflows" in err.value.reason


@pytest.mark.parametrize("age", [20.0, 25.0])
def test_residual_age_at_or_beyond_the_end_of_the_support_is_rejected(age):
    with pytest.raises(ModelError) as err:
        lifedraw.binned_counts([0.0, 10.0, 20.0], [3, 4]).given_survival(age)
    assert err.value.field == "age"
    assert "beyond the end of the support" in err.value.reason


@pytest.mark.parametrize("age", [-1.0, float("nan")])
def test_negative_or_nan_age_is_rejected(age):
    with pytest.raises(ModelError) as err:
        lifedraw.family("exponential", scale=10.0).given_survival(age)
    assert err.value.field == "age"


@pytest.mark.parametrize("weights, words", [
    ([1.0, 2.0], "2 weights for 3 components"),
    ([1.0, -1.0, 1.0], "weight 2"),
    ([1.0, float("nan"), 1.0], "weight 2"),
    ([0.0, 0.0, 0.0], "add up to 0"),
])
def test_bad_mixture_weights_are_rejected(weights, words):
    parts = [lifedraw.family("exponential", scale=s) for s in (1.0, 2.0, 3.0)]
    with pytest.raises(ModelError) as err:
        lifedraw.mixture(parts, weights)
    assert err.value.field == "weights"
    assert words in err.value.reason


def test_mixture_component_that_is_not_a_target_is_named_by_index():
    with pytest.raises(ModelError) as err:
        lifedraw.mixture([lifedraw.family("exponential", scale=1.0), "weibull"], [1, 1])
    assert err.value.field == "components[1]"


def test_competing_without_components_is_rejected():
    with pytest.raises(ModelError) as err:
        lifedraw.competing([])
    assert err.value.field == "components"
