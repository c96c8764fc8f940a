"""Specifications for engine.age_replacement: Barlow & Proschan's age-replacement cost rate.

References: C(T) = [c_p R(T) + c_f F(T)] / integral_0^T R(t) dt (Barlow & Proschan 1965, Mathematical
Theory of Reliability, ch. 4), written here independently with scipy.stats.weibull_min and
scipy.integrate.quad and minimised with scipy.optimize.minimize_scalar; for the exponential law the
closed form C(T) - c_f/theta = c_p exp(-T/theta) / (theta (1 - exp(-T/theta))) > 0 (no finite optimum);
a seeded Monte Carlo fleet started in its stationary age distribution (density R(x) / E[min(L, T)] on
[0, T), Cox 1962, Renewal Theory, sec. 5.2), whose cost per unit time has expectation C(T) exactly.
"""
import math

import numpy as np
import pytest
from scipy import integrate, optimize, stats

import lifedraw
from lifedraw.engine.errors import ModelError

SHAPE, SCALE = 3.0, 1000.0
CP, CF = 100.0, 1000.0


def independent_cost_rate(T, shape=SHAPE, scale=SCALE, cp=CP, cf=CF):
    law = stats.weibull_min(shape, scale=scale)
    return (cp * law.sf(T) + cf * law.cdf(T)) / integrate.quad(law.sf, 0.0, T, epsabs=0, epsrel=1e-12)[0]


def test_wear_out_weibull_optimum_matches_an_independent_minimisation():
    result = lifedraw.age_replacement(lifedraw.family("weibull", shape=SHAPE, scale=SCALE), CP, CF)
    ref = optimize.minimize_scalar(independent_cost_rate, bounds=(10.0, 3000.0), method="bounded",
                                   options={"xatol": 1e-6})
    # The cost rate is flat at its minimum: the age agrees to ~1e-6 relative, the rate to 1e-9.
    assert result["optimal_age"] == pytest.approx(ref.x, rel=1e-5)
    assert result["cost_rate"] == pytest.approx(ref.fun, rel=1e-9)
    mttf = stats.weibull_min(SHAPE, scale=SCALE).mean()
    assert result["cost_rate_run_to_failure"] == pytest.approx(CF / mttf, rel=1e-10)
    curve = np.array([independent_cost_rate(T) for T in result["ages"][::20]])
    np.testing.assert_allclose(result["cost_rates"][::20], curve, rtol=1e-8)


def test_exponential_has_no_finite_optimum():
    theta = 500.0
    result = lifedraw.age_replacement(lifedraw.family("exponential", scale=theta), CP, CF)
    assert result["optimal_age"] is None
    assert result["cost_rate"] == pytest.approx(CF / theta, rel=1e-12)
    T = result["ages"]
    closed = CF / theta + CP * np.exp(-T / theta) / (theta * -np.expm1(-T / theta))
    np.testing.assert_allclose(result["cost_rates"], closed, rtol=1e-8)


def test_falling_hazard_and_dear_prevention_have_no_optimum():
    infant = lifedraw.family("weibull", shape=0.7, scale=SCALE)
    assert lifedraw.age_replacement(infant, CP, CF)["optimal_age"] is None
    wear = lifedraw.family("weibull", shape=SHAPE, scale=SCALE)
    assert lifedraw.age_replacement(wear, CF, CF)["optimal_age"] is None


def stationary_ages(n, T, rng):
    # Rejection from Uniform(0, T) with acceptance R(x): the stationary age density R(x)/E[min(L, T)].
    law = stats.weibull_min(SHAPE, scale=SCALE)
    out = np.empty(0)
    while out.size < n:
        x = rng.uniform(0.0, T, 2 * n)
        out = np.concatenate([out, x[rng.random(2 * n) < law.sf(x)]])
    return out[:n]


@pytest.mark.parametrize("T", [250.0, 450.0, 900.0])
def test_monte_carlo_cost_per_unit_time_meets_the_exact_cost_rate(T):
    units, runs, horizon = 400, 60, 2000.0
    rng = np.random.default_rng(int(T))
    sampler = lifedraw.fit(lifedraw.family("weibull", shape=SHAPE, scale=SCALE))
    fleet = lifedraw.simulate_fleet(sampler, units, horizon, period=horizon, ages=stationary_ages(units, T, rng),
                                    preventive_age=T, runs=runs, seed=int(T), exact=False)
    failures = fleet.failures.sum(axis=1)
    preventive = fleet.replacements.sum(axis=1) - failures
    cost = (CF * failures + CP * preventive) / (units * horizon)
    exact = independent_cost_rate(T)
    # 60 independent runs: the mean within 4 standard errors (fixed seeds).
    assert abs(cost.mean() - exact) < 4 * cost.std(ddof=1) / math.sqrt(runs)


@pytest.mark.parametrize("model", [
    lifedraw.failure_times([50.0, 80.0, 95.0, 120.0, 150.0, 200.0, 220.0, 300.0], [0, 0, 1, 0, 0, 0, 1, 1]),
    lifedraw.binned_counts([0.0, 100.0, 200.0, 300.0, 400.0], [5, 10, 20, 8]),
    lifedraw.hazard_formula("a*b*t**(b-1)", support=(0, float("inf")), params=dict(a=1e-6, b=2.4)),
    lifedraw.family("weibull", shape=2.0, scale=100.0, location=50.0),
])
def test_every_model_kind_gives_a_curve_below_or_at_run_to_failure_cost(model):
    result = lifedraw.age_replacement(model, 1.0, 10.0)
    assert np.all(np.isfinite(result["cost_rates"]))
    assert result["cost_rate"] <= result["cost_rate_run_to_failure"] * (1 + 1e-12)
    if result["optimal_age"] is not None:
        assert result["cost_rate"] <= result["cost_rates"].min() * (1 + 1e-12)


def test_costs_are_validated():
    weib = lifedraw.family("weibull", shape=SHAPE, scale=SCALE)
    for args, field in [((0.0, 10.0), "cost_preventive"), ((1.0, -1.0), "cost_failure"),
                        ((1.0, float("nan")), "cost_failure")]:
        with pytest.raises(ModelError) as err:
            lifedraw.age_replacement(weib, *args)
        assert err.value.field == field
