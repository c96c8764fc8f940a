"""Specifications for engine.life: MTTF, B-lives and mission reliability with intervals.

References are closed forms of the Weibull law, scipy.stats, and seeded Monte Carlo coverage.
"""
import math

import numpy as np
import pytest
from scipy import stats
from scipy.special import gamma

from lifedraw.engine.errors import ModelError
from lifedraw.engine.life import exact_life_figures, life_summary

from scipy_target import ScipyTarget

SEED = 20261201
BETA, ETA = 1.8, 1200.0
MISSION = 500.0


def weibull_mttf(beta, eta):
    # NIST/SEMATECH e-Handbook of Statistical Methods, 8.1.6.2 (Weibull), from memory:
    # mean = eta·Gamma(1 + 1/beta).
    return eta * gamma(1.0 + 1.0 / beta)


def weibull_b_life(p, beta, eta):
    # Inverting F(t) = 1 - exp(-(t/eta)^beta) (same handbook section): t_p = eta·(-ln(1-p))^(1/beta).
    return eta * (-math.log1p(-p)) ** (1.0 / beta)


def weibull_reliability(t, beta, eta):
    # R(t) = exp(-(t/eta)^beta), same section.
    return math.exp(-((t / eta) ** beta))


def weibull_draws(n, seed=SEED):
    return stats.weibull_min(BETA, scale=ETA).rvs(size=n, random_state=np.random.default_rng(seed))


def covers(interval, value):
    return interval["lower"] <= value <= interval["upper"]


# ---- intervals cover the closed forms -----------------------------------------------------

def test_mttf_interval_covers_the_weibull_mean():
    figures = life_summary(weibull_draws(20_000))
    assert covers(figures["mttf"], weibull_mttf(BETA, ETA))


@pytest.mark.parametrize("name, p", [("B1", 0.01), ("B10", 0.10), ("B50", 0.50)])
def test_b_life_interval_covers_the_weibull_quantile(name, p):
    figures = life_summary(weibull_draws(20_000))
    assert covers(figures["b_lives"][name], weibull_b_life(p, BETA, ETA))


def test_reliability_interval_covers_the_weibull_survival():
    figures = life_summary(weibull_draws(20_000), mission_times=[MISSION])
    row = figures["reliability"][0]
    assert row["time"] == MISSION
    assert covers(row, weibull_reliability(MISSION, BETA, ETA))


# ---- coverage close to nominal ----------------------------------------------------------

REPLICATES, SIZE = 400, 500
# A binomial count of 400 covers at 95% has sd sqrt(0.95·0.05/400) = 0.011; 4 sd = 0.044.
COVERAGE_TOLERANCE = 4 * math.sqrt(0.95 * 0.05 / REPLICATES)


@pytest.fixture(scope="module")
def replicate_figures():
    rng = np.random.default_rng(SEED)
    samples = stats.weibull_min(BETA, scale=ETA).rvs(size=(REPLICATES, SIZE), random_state=rng)
    return [life_summary(x, mission_times=[MISSION]) for x in samples]


def test_mttf_interval_coverage_is_close_to_95_percent(replicate_figures):
    truth = weibull_mttf(BETA, ETA)
    coverage = np.mean([covers(f["mttf"], truth) for f in replicate_figures])
    assert abs(coverage - 0.95) <= COVERAGE_TOLERANCE


def test_b10_interval_coverage_is_close_to_95_percent(replicate_figures):
    # The order-statistic interval is exact-or-conservative (Hahn & Meeker, Statistical
    # Intervals, 1991, §5.2), so coverage may sit a little above 95%, within tolerance.
    truth = weibull_b_life(0.10, BETA, ETA)
    coverage = np.mean([covers(f["b_lives"]["B10"], truth) for f in replicate_figures])
    assert abs(coverage - 0.95) <= COVERAGE_TOLERANCE


def test_reliability_interval_coverage_is_close_to_95_percent(replicate_figures):
    truth = weibull_reliability(MISSION, BETA, ETA)
    coverage = np.mean([covers(f["reliability"][0], truth) for f in replicate_figures])
    assert abs(coverage - 0.95) <= COVERAGE_TOLERANCE


# ---- interval constructions against known cases -----------------------------------------

def test_median_interval_for_twenty_draws_is_sixth_to_fifteenth_order_statistic():
    # Distribution-free 95% interval for the median at n = 20 is [x_(6), x_(15)] with
    # confidence 0.9586 (standard sign-test tables, from memory; equals
    # P(6 <= Binomial(20, 1/2) <= 14) by scipy.stats.binom).
    figures = life_summary(np.arange(1.0, 21.0))
    b50 = figures["b_lives"]["B50"]
    assert (b50["lower"], b50["upper"]) == (6.0, 15.0)
    ref = stats.binom.cdf(14, 20, 0.5) - stats.binom.cdf(5, 20, 0.5)
    assert b50["achieved_confidence"] == pytest.approx(ref, rel=1e-12)


def test_b1_interval_has_no_lower_bound_when_the_sample_is_too_small():
    # With n = 50, P(no draw below the 1% point) = 0.99^50 = 0.605 > 2.5%: no order
    # statistic can serve as a 97.5% lower bound.
    figures = life_summary(weibull_draws(50))
    assert figures["b_lives"]["B1"]["lower"] == -math.inf


def test_wilson_interval_when_every_unit_survives():
    # Wilson (1927) score interval at p_hat = 1 is [n/(n + z²), 1] (from the formula, by hand).
    n, z = 40, stats.norm.ppf(0.975)
    figures = life_summary(np.full(n, 10.0), mission_times=[5.0])
    row = figures["reliability"][0]
    assert row["estimate"] == 1.0
    assert row["lower"] == pytest.approx(n / (n + z * z), rel=1e-12)
    assert row["upper"] == pytest.approx(1.0, rel=1e-12)


def test_mttf_interval_is_normal_theory():
    # mean ± z_{0.975}·s/sqrt(n), z from scipy.stats.norm, s with n - 1 (numpy).
    x = weibull_draws(1_000)
    figures = life_summary(x)
    half = stats.norm.ppf(0.975) * np.std(x, ddof=1) / math.sqrt(x.size)
    assert figures["mttf"]["lower"] == pytest.approx(np.mean(x) - half, rel=1e-12)
    assert figures["mttf"]["upper"] == pytest.approx(np.mean(x) + half, rel=1e-12)


# ---- the model's own figures ----------------------------------------------------------------

def test_exact_life_figures_match_the_weibull_closed_forms():
    target = ScipyTarget(stats.weibull_min(BETA, scale=ETA))
    exact = exact_life_figures(target, mission_times=[MISSION, 2 * MISSION])
    assert exact["mttf"]["value"] == pytest.approx(weibull_mttf(BETA, ETA), rel=1e-12)
    for name, p in (("B1", 0.01), ("B10", 0.10), ("B50", 0.50)):
        assert exact["b_lives"][name]["value"] == pytest.approx(weibull_b_life(p, BETA, ETA), rel=1e-12)
    for row in exact["reliability"]:
        assert row["value"] == pytest.approx(weibull_reliability(row["time"], BETA, ETA), rel=1e-12)


# ---- dask: streaming figures --------------------------------------------------------------

def test_dask_figures_agree_with_in_memory_figures_within_the_stated_error():
    da = pytest.importorskip("dask.array")
    x = weibull_draws(50_000)
    times = [100.0, MISSION, 3000.0]
    exact = life_summary(x, mission_times=times)
    streamed = life_summary(da.from_array(x, chunks=7_000), mission_times=times)
    assert streamed["method"] == "streaming"
    # One bin of 2^16 between min and max.
    assert streamed["quantile_error"] == pytest.approx((x.max() - x.min()) / 2**16, rel=1e-12)
    for name in ("B1", "B10", "B50"):
        for key in ("estimate", "lower", "upper"):
            assert abs(streamed["b_lives"][name][key] - exact["b_lives"][name][key]) \
                <= streamed["quantile_error"]
    # MTTF and R(t) are exact reductions: equal up to summation order.
    for key in ("estimate", "lower", "upper"):
        assert streamed["mttf"][key] == pytest.approx(exact["mttf"][key], rel=1e-12)
    assert streamed["reliability"] == exact["reliability"]


def test_dask_quantile_error_bound_holds_where_draws_are_sparse():
    # At n = 2 000, neighbouring order statistics near B1 are several bins apart, so an
    # estimate that only located the lower neighbour would miss by more than one bin.
    da = pytest.importorskip("dask.array")
    x = weibull_draws(2_000)
    exact = life_summary(x)
    streamed = life_summary(da.from_array(x, chunks=300))
    for name in ("B1", "B10", "B50"):
        assert abs(streamed["b_lives"][name]["estimate"] - exact["b_lives"][name]["estimate"]) \
            <= streamed["quantile_error"]


def test_dask_samples_with_nan_raise_model_error():
    da = pytest.importorskip("dask.array")
    with pytest.raises(ModelError) as err:
        life_summary(da.from_array(np.r_[weibull_draws(100), np.nan], chunks=30))
    assert err.value.field == "samples"


# ---- bad input ---------------------------------------------------------------------------

@pytest.mark.parametrize("bad", [np.empty(0), np.ones((5, 2)), np.r_[1.0, np.nan], np.r_[1.0, np.inf]])
def test_bad_samples_raise_model_error_naming_samples(bad):
    with pytest.raises(ModelError) as err:
        life_summary(bad)
    assert err.value.field == "samples"


@pytest.mark.parametrize("bad", [[np.nan], [1.0, np.inf], ["soon"]])
def test_bad_mission_times_raise_model_error(bad):
    with pytest.raises(ModelError) as err:
        life_summary(weibull_draws(100), mission_times=bad)
    assert err.value.field == "mission_times"


@pytest.mark.parametrize("bad", [0.0, 1.0, 1.5, -0.2, float("nan")])
def test_confidence_outside_zero_one_raises_model_error(bad):
    with pytest.raises(ModelError) as err:
        life_summary(weibull_draws(100), confidence=bad)
    assert err.value.field == "confidence"
