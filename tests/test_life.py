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


# ---- coverage at the nominal rate, and only at it ---------------------------------------------

# 2 000 replicate samples of 10 000 Weibull draws each, from numpy's own generator (an
# outside reference generator), fixed seed, so the counts below cannot flake.
# Why 2 000: a count of intervals covering the truth is Binomial(R, coverage). With R = 2 000
# the central 99.98 % range of Binomial(R, 0.95) is 0.931-0.969 and that of Binomial(R, 0.99)
# is 0.980-0.997: they do not overlap, so the test tells 95 % intervals from 99 % ones
# (at R = 400 they would overlap). A correct procedure lands outside its range with
# probability 2e-4 per check.
REPLICATES, SIZE = 2_000, 10_000
TAIL = 1e-4
COVERAGE_MISSION = 400.0        # R(400) = 0.897 for the Weibull below (NIST 8.1.6.2 closed form)


def coverage_band(rate):
    """Central 1 - 2e-4 range of the covering fraction when each interval covers with ``rate``."""
    lo, hi = stats.binom.ppf(TAIL, REPLICATES, rate), stats.binom.isf(TAIL, REPLICATES, rate)
    return lo / REPLICATES, hi / REPLICATES


@pytest.fixture(scope="module")
def replicate_samples():
    rng = np.random.default_rng(SEED)
    return ETA * rng.weibull(BETA, size=(REPLICATES, SIZE))


def truths():
    """The exact model values, all closed forms (NIST/SEMATECH e-Handbook 8.1.6.2)."""
    return {"mttf": weibull_mttf(BETA, ETA),
            **{name: weibull_b_life(p, BETA, ETA) for name, p in (("B1", 0.01), ("B10", 0.10), ("B50", 0.50))},
            "R": weibull_reliability(COVERAGE_MISSION, BETA, ETA)}


def covered_fractions(samples, confidence):
    hits = {key: 0 for key in truths()}
    nominal = {"mttf": confidence, "R": confidence}
    for x in samples:
        f = life_summary(x, mission_times=[COVERAGE_MISSION], confidence=confidence)
        rows = {"mttf": f["mttf"], **f["b_lives"], "R": f["reliability"][0]}
        for key, value in truths().items():
            hits[key] += covers(rows[key], value)
        for name in ("B1", "B10", "B50"):
            # The order-statistic interval's exact coverage (Hahn & Meeker 1991, §5.2): at least
            # the nominal level, the same for every replicate since n is fixed.
            nominal[name] = f["b_lives"][name]["achieved_confidence"]
    return {key: h / len(samples) for key, h in hits.items()}, nominal


def test_the_bands_can_tell_95_from_99_percent():
    assert coverage_band(0.95)[1] < coverage_band(0.99)[0]


def test_95_percent_intervals_cover_the_closed_forms_at_the_nominal_rate(replicate_samples):
    fractions, nominal = covered_fractions(replicate_samples, 0.95)
    for key, fraction in fractions.items():
        lo, hi = coverage_band(nominal[key])
        assert lo <= fraction <= hi, (key, fraction, nominal[key])
        # ...and not at the rate of 99 % intervals: they are not wider than they claim to be.
        assert fraction < coverage_band(0.99)[0], key


def test_99_percent_intervals_cover_at_99_not_95_percent(replicate_samples):
    fractions, nominal = covered_fractions(replicate_samples, 0.99)
    for key, fraction in fractions.items():
        lo, hi = coverage_band(nominal[key])
        assert lo <= fraction <= hi, (key, fraction, nominal[key])
        assert fraction > coverage_band(0.95)[1], key


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


# ---- at scale: the same exact figures chunk by chunk ------------------------------------------

def assert_same_figures(chunked, in_memory):
    # B-lives and R(t) are the same order statistics and counts: equal to the last bit.
    assert chunked["b_lives"] == in_memory["b_lives"]
    assert chunked["reliability"] == in_memory["reliability"]
    # The mean is the same sum in another order (Chan et al. 1983 merging): equal to rounding.
    for key in ("estimate", "lower", "upper"):
        assert chunked["mttf"][key] == pytest.approx(in_memory["mttf"][key], rel=1e-12)


def test_b_lives_are_numpys_quantiles_of_the_same_draws():
    # numpy's default quantile (Hyndman & Fan 1996, definition 7) is the outside reference.
    for n in (50_001, 20_000, 777):           # (n - 1)·p whole, and with fractions 0.99, 0.9, 0.5 ...
        x = weibull_draws(n)
        figures = life_summary(x)
        for name, p in (("B1", 0.01), ("B10", 0.10), ("B50", 0.50)):
            assert figures["b_lives"][name]["estimate"] == np.quantile(x, p)


def test_interval_ends_are_the_binomial_ranks_order_statistics():
    # [x_(r), x_(s)] with r = binom.ppf(0.025) and s = binom.ppf(0.975) + 1 (Hahn & Meeker
    # 1991, §5.2), the ranks taken from scipy.stats.binom and the order statistics from np.sort.
    x = weibull_draws(20_000)
    xs = np.sort(x)
    figures = life_summary(x)
    for name, p in (("B1", 0.01), ("B10", 0.10), ("B50", 0.50)):
        r = int(stats.binom.ppf(0.025, x.size, p))
        s = int(stats.binom.ppf(0.975, x.size, p)) + 1
        assert (figures["b_lives"][name]["lower"], figures["b_lives"][name]["upper"]) == (xs[r - 1], xs[s - 1])


def test_a_dask_array_gives_the_exact_in_memory_figures_in_one_pass():
    da = pytest.importorskip("dask.array")
    x = weibull_draws(200_003)
    times = [100.0, MISSION, 3000.0]
    chunked = life_summary(da.from_array(x, chunks=30_000), mission_times=times)
    assert_same_figures(chunked, life_summary(x, mission_times=times))
    assert chunked["method"] == "exact order statistics"
    assert chunked["passes"] == 1
    # Only the draws inside the windows around the wanted ranks are kept: about 2·5·(0.099 +
    # 0.3 + 0.5)/sqrt(60,000) = 3.7 % of the sample for a 2-chunk pilot (rank_windows.py).
    assert 0 < chunked["computation"]["kept"] < x.size / 10


def test_a_shard_folder_gives_the_exact_in_memory_figures(tmp_path):
    pytest.importorskip("dask.array")
    from lifedraw.engine import family, fit
    from lifedraw.engine.generate import generate
    sampler = fit(family("weibull", shape=BETA, scale=ETA))
    folder = tmp_path / "shards"
    x = generate(sampler, 120_000, chunk=25_000, seed=3, out=folder).compute(scheduler="sync")
    assert_same_figures(life_summary(str(folder), [MISSION]), life_summary(x, [MISSION]))


def test_bins_too_full_to_keep_are_split_by_an_extra_pass(monkeypatch):
    da = pytest.importorskip("dask.array")
    from lifedraw.engine import order_statistics
    monkeypatch.setattr(order_statistics, "KEEP_LIMIT", 50)
    monkeypatch.setattr(order_statistics, "WINDOW_KEEP_LIMIT", 50)
    x = weibull_draws(100_000)
    chunked = life_summary(da.from_array(x, chunks=20_000))
    # Windows would keep far more than 50 draws, so the radix select runs: histogram, split, keep.
    assert chunked["passes"] == 3
    assert_same_figures(chunked, life_summary(x))


def test_ties_and_negative_values_are_ordered_exactly():
    da = pytest.importorskip("dask.array")
    x = np.concatenate([np.full(30_000, 7.0), -weibull_draws(10_000), np.zeros(5), -np.zeros(5)])
    x = np.random.default_rng(1).permutation(x)
    assert_same_figures(life_summary(da.from_array(x, chunks=9_000)), life_summary(x))


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
