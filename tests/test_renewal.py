"""Specifications for engine.renewal: the renewal function M(t) and density m(t) against closed forms.

References: the Poisson process (exponential lifetimes, M(t) = t/theta; Cox 1962, Renewal Theory,
ch. 1); the Erlang-2 renewal function M(t) = lambda t/2 - 1/4 + exp(-2 lambda t)/4 (Cox 1962, ch. 4;
recalled from memory and rederived here from M*(s) = F*(s)/(1 - F*(s)) with F*(s) = lambda^2/(s + lambda)^2);
Smith's asymptote M(t) ~ t/mu + (sigma^2 - mu^2)/(2 mu^2) (Smith 1954; Cox 1962, sec. 4.5) with mu
and sigma^2 from scipy.stats; deterministic lives d, M(t) = floor(t/d).
"""
import math

import numpy as np
import pytest
from scipy import stats

import lifedraw
from lifedraw.engine.errors import ModelError

LAMBDA = 0.3
AGES = np.array([0.05, 0.5, 1.0, 3.0, 7.5, 20.0, 60.0])


def erlang2_renewal(t, lam):
    # Closed form quoted in the module docstring.
    return lam * t / 2 - 0.25 + np.exp(-2 * lam * t) / 4


def test_exponential_renewal_function_is_t_over_theta():
    theta = 10.0
    M = lifedraw.renewal_function(lifedraw.family("exponential", scale=theta), AGES)
    # The scheme is exact for a linear M up to rounding: 1e-9 relative leaves room for the sums' rounding.
    np.testing.assert_allclose(M, AGES / theta, rtol=1e-9, atol=1e-12)


def test_erlang2_renewal_function_matches_its_closed_form():
    M = lifedraw.renewal_function(lifedraw.family("gamma", shape=2, scale=1 / LAMBDA), AGES)
    # Stated accuracy of the module: 1e-6 M(t) + 1e-9 for smooth laws.
    np.testing.assert_allclose(M, erlang2_renewal(AGES, LAMBDA), rtol=1e-6, atol=1e-9)


def test_erlang2_renewal_density_is_the_derivative_of_the_closed_form():
    m = lifedraw.renewal_density(lifedraw.family("gamma", shape=2, scale=1 / LAMBDA), AGES)
    expected = LAMBDA / 2 * (1 - np.exp(-2 * LAMBDA * AGES))
    np.testing.assert_allclose(m, expected, rtol=1e-6, atol=1e-9)


@pytest.mark.parametrize("shape", [1.6, 3.5])
def test_weibull_renewal_function_reaches_smiths_asymptote(shape):
    scale = 100.0
    law = stats.weibull_min(shape, scale=scale)
    mu, var = law.mean(), law.var()
    t = np.array([25.0, 40.0]) * mu
    M = lifedraw.renewal_function(lifedraw.family("weibull", shape=shape, scale=scale), t)
    # For shape > 1 the approach to the asymptote is faster than any power of 1/t; after 25 mean
    # lives it is far below the 1e-6 tolerance (the solver's stated accuracy on M ~ 25).
    np.testing.assert_allclose(M, t / mu + (var - mu**2) / (2 * mu**2), rtol=1e-6)


def test_renewal_density_tends_to_one_over_the_mean():
    # Key renewal theorem (Cox 1962, sec. 4.4): m(t) -> 1/mu for a non-lattice law.
    shape, scale = 2.2, 50.0
    m = lifedraw.renewal_density(lifedraw.family("weibull", shape=shape, scale=scale), 40 * scale)
    assert m == pytest.approx(1 / stats.weibull_min(shape, scale=scale).mean(), rel=1e-6)


def test_deterministic_lives_renew_at_whole_multiples():
    # Every failure record at age 5: each unit lives exactly 5, so M(t) = floor(t/5).
    target = lifedraw.failure_times([5.0, 5.0, 5.0])
    t = np.array([2.0, 7.5, 12.0, 17.5, 31.0])
    np.testing.assert_allclose(lifedraw.renewal_function(target, t), np.floor(t / 5.0), atol=1e-9)


def test_mixture_matches_a_direct_monte_carlo_count():
    # An independent reference: count renewals of scipy-drawn lives directly (200,000 sockets).
    a, b = stats.weibull_min(0.7, scale=3.0), stats.weibull_min(4.0, scale=10.0)
    target = lifedraw.mixture([lifedraw.family("weibull", shape=0.7, scale=3.0),
                               lifedraw.family("weibull", shape=4.0, scale=10.0)], weights=[0.3, 0.7])
    rng = np.random.default_rng(7)
    horizon, n = 25.0, 200_000
    clock = np.zeros(n)
    count = np.zeros(n)
    alive = np.ones(n, bool)
    while alive.any():
        k = int(alive.sum())
        pick = rng.random(k) < 0.3
        life = np.where(pick, a.rvs(k, random_state=rng), b.rvs(k, random_state=rng))
        clock[alive] += life
        hit = alive.copy()
        hit[alive] = clock[alive] <= horizon
        count[hit] += 1
        alive = hit
    M = lifedraw.renewal_function(target, horizon)
    # 5 standard errors of the Monte Carlo mean.
    assert abs(M - count.mean()) < 5 * count.std() / math.sqrt(n)


def test_bad_ages_and_laws_are_named():
    weib = lifedraw.family("weibull", shape=2, scale=10)
    with pytest.raises(ModelError) as err:
        lifedraw.renewal_function(weib, [-1.0, 2.0])
    assert err.value.field == "t"
    with pytest.raises(ModelError) as err:
        lifedraw.renewal_function(lifedraw.family("normal", mean=0.0, sd=1.0), 3.0)
    assert err.value.field == "target"
    with pytest.raises(ModelError) as err:
        lifedraw.renewal_density(lifedraw.failure_times([1.0, 2.0, 3.0]), 3.0)
    assert err.value.field == "target"
    with pytest.raises(ModelError) as err:
        lifedraw.renewal_function("weibull", 3.0)
    assert err.value.field == "target"
