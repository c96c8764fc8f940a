"""Specifications for engine.fleet (simulate_fleet) and the samplers' residual draws.

References: the Poisson process (a fleet of exponential units fails per period as Poisson(units
period / theta), whatever the units' ages; Cox 1962, Renewal Theory, ch. 1) checked with
scipy.stats.poisson and scipy.stats.chisquare; conditional laws of residual life
R_a(x) = R(a + x)/R(a) (NIST/SEMATECH e-Handbook 8.1.2.4) from scipy.stats.weibull_min's logsf;
the exact expectations of engine.renewal (themselves tested against closed forms in test_renewal.py).
"""
import math

import numpy as np
import pytest
from scipy import stats

import lifedraw
from lifedraw.engine.errors import ModelError

SEED = 20261202
THETA = 10.0


@pytest.fixture(scope="module")
def exponential_fleet():
    # 50 units of mean life 10 counted over 5 periods of 1: Poisson(5) per period.
    sampler = lifedraw.fit(lifedraw.family("exponential", scale=THETA))
    ages = np.linspace(0.0, 30.0, 50)        # ages do not matter to a memoryless law
    return lifedraw.simulate_fleet(sampler, 50, 5.0, period=1.0, ages=ages, runs=4000, seed=SEED)


def test_exponential_fleet_fails_per_period_as_poisson(exponential_fleet):
    counts = exponential_fleet.failures.ravel()
    lam = 50 * 1.0 / THETA
    top = int(stats.poisson.ppf(1 - 1e-3, lam))
    observed = np.array([np.sum(counts == k) for k in range(top)] + [np.sum(counts >= top)])
    expected = np.append(stats.poisson.pmf(np.arange(top), lam), stats.poisson.sf(top - 1, lam)) * counts.size
    # 20,000 counts: a chi-square test at the 0.1% level (fixed seed) catches a 2% error in the rate.
    assert stats.chisquare(observed, expected).pvalue > 1e-3
    assert counts.var() == pytest.approx(lam, rel=0.05)   # Poisson: variance = mean (5 standard errors ~ 5%)


def test_exponential_fleet_expectation_is_exact(exponential_fleet):
    np.testing.assert_allclose(exponential_fleet.expected_failures, 5.0, rtol=1e-8)


def test_exponential_fleet_spares_match_the_poisson_quantile(exponential_fleet):
    lam_total = 50 * 5.0 / THETA
    s = exponential_fleet.spares(0.95)
    assert s["low"] <= stats.poisson.ppf(0.95, lam_total) <= s["high"]
    # P(D <= 33) = 0.9503 for Poisson(25): the empirical 95% point may land on 33 or 34.
    assert abs(s["stock"] - stats.poisson.ppf(0.95, lam_total)) <= 1


def test_aged_fleet_with_preventive_replacement_meets_its_exact_expectation():
    weib = lifedraw.family("weibull", shape=2.5, scale=100.0)
    ages = np.repeat([0.0, 15.0, 40.0, 65.0, 95.0], 100)
    result = lifedraw.simulate_fleet(lifedraw.fit(weib), 500, 240.0, period=20.0, ages=ages,
                                     preventive_age=85.0, runs=300, seed=SEED)
    mean, low, high = result.mean_interval(0.999)
    # 12 periods, each within its 99.9% interval of the Monte Carlo mean (fixed seed).
    assert np.all((low <= result.expected_failures) & (result.expected_failures <= high))
    assert result.expected_error < 0.05 * result.expected_failures.min()
    # Units aged 95 are past 85: replaced at time 0, so period 1 has at least 100 replacements.
    assert result.replacements[:, 0].min() >= 100
    # Replacements jump where preventive replacements fall (85 - 65 = 20 = one period, 105, ...):
    # the exact count puts those jumps on its grid, so it also meets the simulation period by period.
    repl = result.replacements
    half = 3.29 * repl.std(axis=0, ddof=1) / np.sqrt(result.runs)
    assert np.all(np.abs(repl.mean(axis=0) - result.expected_replacements) <= half)


@pytest.mark.parametrize("method", ["inversion", "rejection", "ratio-of-uniforms"])
def test_residual_lives_follow_the_conditional_law(method):
    shape, scale, age = 2.2, 1000.0, 1500.0     # R(age) = 0.1
    sampler = lifedraw.fit(lifedraw.family("weibull", shape=shape, scale=scale), method)
    x = sampler.sample_residual(np.full(100_000, age), SEED)
    law = stats.weibull_min(shape, scale=scale)
    cdf = lambda v: -np.expm1(law.logsf(age + v) - law.logsf(age))
    assert stats.kstest(x, cdf).pvalue > 1e-3


def test_residual_lives_of_a_formula_sampler_follow_the_conditional_law():
    target = lifedraw.hazard_formula("b/s*(t/s)**(b-1)", support=(0, float("inf")), params=dict(b=1.7, s=300.0))
    sampler = lifedraw.fit(target, "inversion")
    ages = np.tile([0.0, 100.0, 700.0], 40_000)   # R(700) = 0.03: the exact inverse takes over
    x = sampler.sample_residual(ages, SEED)
    law = stats.weibull_min(1.7, scale=300.0)
    for a in (0.0, 100.0, 700.0):
        cdf = lambda v: -np.expm1(law.logsf(a + v) - law.logsf(a))
        assert stats.kstest(x[ages == a], cdf).pvalue > 1e-3


def test_residual_lives_far_in_the_tail_stay_exact():
    # R(a) = exp(-(a/scale)^shape) = 1e-200: F(a) rounds to 1, the inverse survival form does not.
    shape, scale = 2.0, 1.0
    age = math.sqrt(200 * math.log(10))
    sampler = lifedraw.fit(lifedraw.family("weibull", shape=shape, scale=scale))
    x = sampler.sample_residual(np.full(20_000, age), SEED)
    assert np.all(np.isfinite(x)) and np.all(x >= 0)
    law = stats.weibull_min(shape, scale=scale)
    cdf = lambda v: -np.expm1(law.logsf(age + v) - law.logsf(age))
    assert stats.kstest(x, cdf).pvalue > 1e-3


def test_residual_lives_of_failure_records_stay_on_the_records():
    target = lifedraw.failure_times([10.0, 20.0, 30.0, 40.0])
    x = lifedraw.fit(target, "table").sample_residual(np.full(40_000, 25.0), SEED)
    # Given survival past 25, the unit fails at 30 or 40 with equal chances (5, 15 remaining).
    assert set(np.unique(x)) == {5.0, 15.0}
    assert np.mean(x == 5.0) == pytest.approx(0.5, abs=4 * math.sqrt(0.25 / 40_000))


def test_same_seed_same_numbers_whatever_the_thread_count():
    import dask
    sampler = lifedraw.fit(lifedraw.family("weibull", shape=1.5, scale=50.0))
    kwargs = dict(period=10.0, ages=np.arange(6000) % 70.0, runs=200, seed=5, exact=False)   # 2 chunks
    with dask.config.set(num_workers=1):
        one = lifedraw.simulate_fleet(sampler, 6000, 100.0, **kwargs)
    with dask.config.set(num_workers=2):
        two = lifedraw.simulate_fleet(sampler, 6000, 100.0, **kwargs)
    np.testing.assert_array_equal(one.failures, two.failures)
    other = lifedraw.simulate_fleet(sampler, 6000, 100.0, **{**kwargs, "seed": 6})
    assert not np.array_equal(one.failures, other.failures)


def test_systems_are_fleet_units():
    pump = lifedraw.family("weibull", shape=1.9, scale=18000.0)
    station = lifedraw.series([lifedraw.family("weibull", shape=1.2, scale=60000.0),
                               lifedraw.parallel([pump, pump])])
    result = lifedraw.simulate_fleet(station, 200, 40000.0, period=10000.0, ages=3000.0, runs=100, seed=SEED)
    mean, low, high = result.mean_interval(0.999)
    assert np.all((low <= result.expected_failures) & (result.expected_failures <= high))


def test_progress_is_reported_chunk_by_chunk():
    seen = []
    lifedraw.simulate_fleet(lifedraw.family("exponential", scale=1.0), 20_000, 2.0, period=1.0, runs=100,
                            seed=1, exact=False, progress=lambda done, total: seen.append((done, total)))
    assert seen[0] == (0, 2) and seen[-1] == (2, 2)


def test_summary_states_the_assumptions(exponential_fleet):
    text = exponential_fleet.summary()
    assert "independent units" in text and "qualified engineers" in text
    assert "spares for a 95% service level" in text


@pytest.mark.parametrize("kwargs, field", [
    (dict(units=0), "units"), (dict(runs=0), "runs"), (dict(horizon=-1.0), "horizon"),
    (dict(period=0.0), "period"), (dict(period=1e-6), "period"), (dict(ages=[1.0, 2.0]), "ages"),
    (dict(ages=-3.0), "ages"), (dict(preventive_age=-5.0), "preventive_age"), (dict(sampler="gearbox"), "sampler"),
    (dict(ages=1e9), "ages"), (dict(client=object()), "client"),
])
def test_bad_input_is_named(kwargs, field):
    args = dict(sampler=lifedraw.family("weibull", shape=3.0, scale=10.0), units=5, horizon=30.0, period=5.0)
    args.update(kwargs)
    with pytest.raises(ModelError) as err:
        lifedraw.simulate_fleet(args.pop("sampler"), args.pop("units"), args.pop("horizon"), runs=args.pop("runs", 10),
                                **args)
    assert err.value.field == field


def test_spares_service_level_must_lie_inside_zero_one(exponential_fleet):
    with pytest.raises(ModelError) as err:
        exponential_fleet.spares(1.0)
    assert err.value.field == "service_level"


# ---- a real cluster -----------------------------------------------------------------------------

@pytest.mark.cluster
def test_two_worker_processes_give_the_threaded_numbers(cluster_client):
    # A formula sampler travels as its saved file; 25,000 units x 50 runs make 2 chunks of units.
    target = lifedraw.hazard_formula("b/s*(t/s)**(b-1)", support=(0, float("inf")), params=dict(b=2.0, s=40.0))
    sampler = lifedraw.fit(target)
    kwargs = dict(period=10.0, preventive_age=45.0, runs=50, seed=11, exact=False)
    on_cluster = lifedraw.simulate_fleet(sampler, 25_000, 120.0, client=cluster_client, **kwargs)
    threaded = lifedraw.simulate_fleet(sampler, 25_000, 120.0, **kwargs)
    np.testing.assert_array_equal(on_cluster.failures, threaded.failures)
    np.testing.assert_array_equal(on_cluster.replacements, threaded.replacements)
