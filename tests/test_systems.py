"""Specifications for engine.systems: series, parallel, k-out-of-n and cold-standby lifetimes.

References: NIST/SEMATECH e-Handbook of Statistical Methods, section 8.1.8
(https://www.itl.nist.gov/div898/handbook/apr/section1/apr18.htm): 8.1.8.2 series model,
8.1.8.3 parallel model, 8.1.8.4 r out of n model, 8.1.8.5 standby model; closed forms of the
exponential and gamma laws; scipy.stats; brute-force enumeration; seeded Monte Carlo.
"""
import itertools
import math
import pickle

import numpy as np
import pytest
from scipy import integrate, stats

import lifedraw
from lifedraw import engine
from lifedraw.engine import ModelError, Target
from lifedraw.engine.scenarios import load_scenario, scenario_from_toml
from lifedraw.engine.systems import (Component, k_out_of_n, parallel, series, standby, system_from_scenario,
                            system_from_spec)

SEED = 20261201
# Monte Carlo checks: n = 200 000 draws; a reliability estimate is accepted within 4.5
# binomial standard errors (false alarm ~7e-6 per check), which still catches an error in
# R(t) of about 0.005 at R = 0.5.
N_MC, Z_MC = 200_000, 4.5


def expo(mean):
    return lifedraw.family("exponential", scale=mean)


def weibull(shape, scale):
    return lifedraw.family("weibull", shape=shape, scale=scale)


def assert_survival_fraction_matches(draws, t, exact):
    n = draws.size
    for ti, r in zip(np.atleast_1d(t), np.atleast_1d(exact)):
        k = np.count_nonzero(draws > ti)
        se = math.sqrt(max(r * (1 - r), 1e-12) / n)
        assert abs(k / n - r) <= Z_MC * se + 1.0 / n, f"R({ti:g}): simulated {k / n:.5f}, exact {r:.5f}"


# ---- series (e-Handbook 8.1.8.2) -------------------------------------------------------------

def test_series_of_exponentials_is_exponential_with_summed_rate():
    # 8.1.8.2: R_S = prod R_i; for exponentials exp(-sum(lambda_i) t).
    means = [1000.0, 500.0, 2000.0]
    rate = sum(1 / m for m in means)
    system = series([expo(m) for m in means])
    t = np.array([10.0, 300.0, 1000.0, 5000.0])
    np.testing.assert_allclose(system.reliability(t), np.exp(-rate * t), rtol=1e-13)
    np.testing.assert_allclose(system.unreliability(t), -np.expm1(-rate * t), rtol=1e-13)
    assert system.mean() == pytest.approx(1 / rate, rel=1e-10)


def test_series_draws_follow_the_summed_rate_exponential():
    # Kolmogorov-Smirnov against scipy's exponential with rate sum(lambda_i); with 1e5 draws
    # a correct sampler has p < 1e-3 one time in a thousand.
    means = [1000.0, 500.0, 2000.0]
    rate = sum(1 / m for m in means)
    x = series([expo(m) for m in means]).sample(100_000, SEED)
    assert stats.kstest(x, stats.expon(scale=1 / rate).cdf).pvalue > 1e-3


def test_series_hazard_is_the_sum_of_the_part_hazards():
    # 8.1.8.2: h_S(t) = sum h_i(t); the hazards from scipy.stats.weibull_min.
    parts = [(1.5, 800.0), (0.8, 3000.0), (3.0, 1200.0)]
    system = series([weibull(b, e) for b, e in parts])
    t = np.array([5.0, 200.0, 700.0, 1500.0])
    hazard = sum(stats.weibull_min(b, scale=e).pdf(t) / stats.weibull_min(b, scale=e).sf(t) for b, e in parts)
    np.testing.assert_allclose(system.pdf(t) / system.reliability(t), hazard, rtol=1e-12)


# ---- parallel (e-Handbook 8.1.8.3) -------------------------------------------------------------

def test_parallel_unreliability_is_the_product_of_part_cdfs():
    # 8.1.8.3: F_S = prod F_i, with F_i from scipy.stats.weibull_min.
    parts = [(1.5, 800.0), (0.8, 3000.0), (3.0, 1200.0)]
    system = parallel([weibull(b, e) for b, e in parts])
    t = np.array([5.0, 200.0, 700.0, 1500.0, 6000.0])
    product = np.prod([stats.weibull_min(b, scale=e).cdf(t) for b, e in parts], axis=0)
    np.testing.assert_allclose(system.unreliability(t), product, rtol=1e-12)
    np.testing.assert_allclose(system.reliability(t), 1 - product, rtol=1e-12)


def test_parallel_of_two_exponentials_has_the_inclusion_exclusion_mean():
    # E[max(T1, T2)] = 1/l1 + 1/l2 - 1/(l1 + l2) (inclusion-exclusion on R_S = R1 + R2 - R1 R2;
    # closed form from memory, derivable from 8.1.8.3).
    l1, l2 = 1 / 1000.0, 1 / 250.0
    system = parallel([expo(1 / l1), expo(1 / l2)])
    assert system.mean() == pytest.approx(1 / l1 + 1 / l2 - 1 / (l1 + l2), rel=1e-10)


# ---- k out of n (e-Handbook 8.1.8.4) ------------------------------------------------------------

def test_k_out_of_n_identical_units_follow_the_binomial_sum():
    # 8.1.8.4: R_S = sum_{i=k}^{n} C(n, i) R^i (1 - R)^(n - i), here via scipy.stats.binom.
    mean, n, k = 1000.0, 5, 3
    system = k_out_of_n(k, [expo(mean)] * n)
    t = np.array([50.0, 400.0, 1000.0, 3000.0])
    p = np.exp(-t / mean)
    np.testing.assert_allclose(system.reliability(t), stats.binom.sf(k - 1, n, p), rtol=1e-12)
    np.testing.assert_allclose(system.unreliability(t), stats.binom.cdf(k - 1, n, p), rtol=1e-10)


def test_k_out_of_n_identical_exponentials_have_the_harmonic_mean_life():
    # The system fails at the (n-k+1)-th failure; the gaps between exponential failures are
    # exponential with rates n l, (n-1) l, ..., k l, so MTTF = (1/l) sum_{j=k}^{n} 1/j
    # (Renyi's representation of exponential order statistics; closed form from memory).
    mean, n, k = 1000.0, 5, 3
    system = k_out_of_n(k, [expo(mean)] * n)
    assert system.mean() == pytest.approx(mean * sum(1 / j for j in range(k, n + 1)), rel=1e-10)


def test_k_out_of_n_unequal_units_match_enumeration_of_all_states():
    # 8.1.8.4 note: with unequal parts, R_S sums the probabilities of every state with at
    # least k survivors, each a product of R's and F's. Enumerated here by brute force.
    parts = [(1.5, 800.0), (0.8, 3000.0), (3.0, 1200.0), (2.0, 2000.0)]
    k = 2
    system = k_out_of_n(k, [weibull(b, e) for b, e in parts])
    t = np.array([100.0, 900.0, 2500.0])
    R = np.array([stats.weibull_min(b, scale=e).sf(t) for b, e in parts])
    expected = np.zeros_like(t)
    for state in itertools.product([0, 1], repeat=len(parts)):
        if sum(state) >= k:
            expected += np.prod([R[i] if up else 1 - R[i] for i, up in enumerate(state)], axis=0)
    np.testing.assert_allclose(system.reliability(t), expected, rtol=1e-12)


def test_k_out_of_n_reduces_to_series_and_parallel():
    # 8.1.8.4: r = n is the series model, r = 1 the parallel model.
    parts = [weibull(1.5, 800.0), weibull(0.8, 3000.0), weibull(3.0, 1200.0)]
    t = np.array([100.0, 900.0, 2500.0])
    np.testing.assert_allclose(k_out_of_n(3, parts).reliability(t), series(parts).reliability(t), rtol=1e-12)
    np.testing.assert_allclose(k_out_of_n(1, parts).reliability(t), parallel(parts).reliability(t), rtol=1e-12)


def test_k_out_of_n_density_is_minus_the_slope_of_reliability():
    # f = -dR/dt, checked against a central difference of the exact R (step 1e-3 h; the
    # difference error is ~1e-9 relative here).
    system = k_out_of_n(2, [weibull(1.5, 800.0), weibull(0.8, 3000.0), weibull(3.0, 1200.0)])
    t, h = np.array([100.0, 900.0, 2500.0]), 1e-3
    slope = (system.reliability(t - h) - system.reliability(t + h)) / (2 * h)
    np.testing.assert_allclose(system.pdf(t), slope, rtol=1e-6)


# ---- cold standby (e-Handbook 8.1.8.5) ------------------------------------------------------------

def test_two_exponential_units_in_standby_follow_the_handbook_formula():
    # 8.1.8.5: F_2(t) = 1 - l t e^(-l t) - e^(-l t), i.e. R(t) = e^(-l t)(1 + l t).
    lam = 1 / 1000.0
    system = standby([expo(1 / lam)] * 2)
    t = np.array([1.0, 100.0, 1000.0, 3000.0, 10000.0, 50000.0])
    np.testing.assert_allclose(system.reliability(t), np.exp(-lam * t) * (1 + lam * t), rtol=1e-12)
    # The same F_2 evaluated without cancellation at small t: the gamma(2) CDF (scipy.stats).
    np.testing.assert_allclose(system.unreliability(t), stats.gamma(2, scale=1 / lam).cdf(t), rtol=1e-10)
    np.testing.assert_allclose(system.pdf(t), lam**2 * t * np.exp(-lam * t), rtol=1e-9)


@pytest.mark.parametrize("units, rtol", [(3, 1e-10), (4, 2e-8), (12, 5e-8)])
def test_n_exponential_units_in_standby_have_a_gamma_life(units, rtol):
    # 8.1.8.5: f_n(t) = l^n t^(n-1) e^(-l t) / (n-1)!, the gamma law (scipy.stats.gamma).
    # Up to 3 parts the convolution is nested exactly (1e-10); beyond, each partial sum is a
    # table good to TABLE_TOLERANCE (4e-9 in log F and log R) per level, so 2e-8 and 5e-8.
    lam = 1 / 1000.0
    system = standby([expo(1 / lam)] * units)
    ref = stats.gamma(units, scale=1 / lam)
    t = np.array([10.0, 1000.0, 4000.0, 15000.0]) * max(1, units // 4)
    np.testing.assert_allclose(system.reliability(t), ref.sf(t), rtol=rtol)
    np.testing.assert_allclose(system.unreliability(t), ref.cdf(t), rtol=rtol)


def test_two_hundred_standby_units_finish_and_follow_the_gamma_law():
    # Issue 14: the nested convolution cost grew exponentially with the units (4 units: 24 s,
    # 200 never finished); the recursion in the number of parts is linear. Reference:
    # scipy.stats.gamma(200) (8.1.8.5 with identical exponential units). 200 tabulated levels
    # of 4e-9 each: 1e-6 relative allowed in the bulk (measured: about 1e-8).
    system = standby([expo(1000.0)] * 200)
    ref = stats.gamma(200, scale=1000.0)
    t = np.array([160e3, 190e3, 200e3, 210e3, 240e3])
    np.testing.assert_allclose(system.reliability(t), ref.sf(t), rtol=1e-6)
    np.testing.assert_allclose(system.unreliability(t), ref.cdf(t), rtol=1e-6)
    np.testing.assert_allclose(system.pdf(t), ref.pdf(t), rtol=1e-5)


def test_standby_of_six_unequal_exponentials_follows_the_hypoexponential_law():
    # Sum of independent exponentials with distinct rates (hypoexponential law; Ross,
    # Introduction to Probability Models, sec. 5.2.4, from memory):
    # R(t) = sum_i prod_{j != i} l_j / (l_j - l_i) exp(-l_i t). Tabulated levels: 5e-8.
    rates = np.array([1 / 300, 1 / 500, 1 / 700, 1 / 1100, 1 / 1300, 1 / 1700])
    system = standby([expo(1 / r) for r in rates])
    t = np.array([1500.0, 4000.0, 5600.0, 9000.0, 20000.0])
    coef = np.array([np.prod([rj / (rj - ri) for rj in rates if rj != ri]) for ri in rates])
    exact = np.exp(-np.outer(t, rates)) @ coef
    np.testing.assert_allclose(system.reliability(t), exact, rtol=5e-8)


def test_standby_of_unequal_gamma_units_adds_their_shapes():
    # Gamma laws with a common scale add their shapes (closed form); five unequal parts, two
    # of them with density poles at 0. Reference: scipy.stats.gamma. Tabulated levels: 5e-8.
    shapes = [0.5, 0.8, 1.7, 2.5, 4.2]
    system = standby([lifedraw.family("gamma", shape=k, scale=100.0) for k in shapes])
    ref = stats.gamma(sum(shapes), scale=100.0)
    t = np.array([300.0, 1000.0, 1370.0, 2000.0, 4000.0])
    np.testing.assert_allclose(system.reliability(t), ref.sf(t), rtol=5e-8)
    np.testing.assert_allclose(system.unreliability(t), ref.cdf(t), rtol=5e-8)


def test_standby_mean_is_the_sum_of_the_part_means():
    # E[T_1 + T_2] = E[T_1] + E[T_2]; Weibull means from scipy.stats.weibull_min.
    system = standby([weibull(0.6, 500.0), weibull(3.0, 800.0)])
    expected = stats.weibull_min(0.6, scale=500.0).mean() + stats.weibull_min(3.0, scale=800.0).mean()
    assert system.mean() == pytest.approx(expected, rel=1e-10)


# ---- drawing -----------------------------------------------------------------------------------

SYSTEMS = {
    "series": lambda: series([weibull(1.5, 800.0), weibull(0.8, 3000.0)]),
    "parallel": lambda: parallel([weibull(1.5, 800.0), weibull(0.8, 3000.0)]),
    "2-out-of-3": lambda: k_out_of_n(2, [weibull(1.5, 800.0), weibull(0.8, 3000.0), weibull(3.0, 1200.0)]),
    "standby": lambda: standby([weibull(1.5, 800.0), weibull(0.8, 3000.0)]),
    "nested": lambda: series([weibull(1.2, 6000.0),
                              standby([parallel([weibull(1.9, 1800.0)] * 2), weibull(1.9, 1800.0)])]),
}


@pytest.mark.parametrize("name", SYSTEMS)
def test_simulated_survival_matches_exact_reliability(name):
    system = SYSTEMS[name]()
    t = np.array([200.0, 800.0, 2000.0])
    assert_survival_fraction_matches(system.sample(N_MC, SEED), t, system.reliability(t))


def test_simulated_mean_matches_exact_mean_of_a_nested_system():
    # Sample mean within 4.5 standard errors of mean() (normal theory).
    system = SYSTEMS["nested"]()
    x = system.sample(N_MC, SEED)
    assert abs(x.mean() - system.mean()) <= Z_MC * x.std(ddof=1) / math.sqrt(x.size)


def test_draws_are_reproducible_from_the_seed():
    system = SYSTEMS["nested"]()
    np.testing.assert_array_equal(system.sample(1000, 7), system.sample(1000, 7))
    assert not np.array_equal(system.sample(1000, 7), system.sample(1000, 8))


def test_life_summary_interval_covers_the_exact_reliability():
    # engine.life_summary's Wilson interval at 99.9% confidence, from 1e5 draws at a fixed seed.
    system = SYSTEMS["standby"]()
    summary = system.life_summary(100_000, SEED, mission_times=[500.0, 2000.0], confidence=0.999)
    assert summary["n"] == 100_000
    for row, exact in zip(summary["reliability"], system.reliability([500.0, 2000.0])):
        assert row["lower"] <= exact <= row["upper"]


# ---- parts and errors ------------------------------------------------------------------------------

def test_a_target_part_is_fitted_and_a_sampler_part_is_used_as_given():
    sampler = engine.fit(weibull(1.5, 800.0))
    system = series([weibull(0.8, 3000.0), sampler])
    assert all(isinstance(p, Component) for p in system.parts)
    assert system.parts[1].sampler is sampler
    assert system.parts[0].sampler.method == "inversion"


def test_k_outside_one_to_n_is_refused():
    with pytest.raises(ModelError) as err:
        k_out_of_n(4, [expo(1.0)] * 3)
    assert err.value.field == "k"


def test_a_system_needs_parts_of_known_kinds():
    with pytest.raises(ModelError) as err:
        series([])
    assert err.value.field == "parts"
    with pytest.raises(ModelError) as err:
        parallel([expo(1.0), "pump"])
    assert err.value.field == "parts[1]"


def test_systems_pickle_through_their_saved_samplers():
    # Formula targets hold compiled functions; a system must still travel to Dask workers.
    formula = lifedraw.density_formula("t**(k - 1)*exp(-(t/s)**p)", params={"k": 2.5, "p": 1.6, "s": 9000.0})
    system = standby([formula, weibull(2.0, 9000.0)])
    again = pickle.loads(pickle.dumps(system))
    np.testing.assert_array_equal(again.sample(10_000, 3), system.sample(10_000, 3))
    assert again.fingerprint() == system.fingerprint()


# ---- the scenario file ---------------------------------------------------------------------------------

def pumping_station_reference(t, panel=(1.2, 60000.0), pump=(1.9, 18000.0)):
    """Independent evaluation with scipy: R_panel(t) [R_spare(t) + int_0^t f_spare(s) R_pair(t-s) ds],
    R_pair = 1 - F_pump^2 (8.1.8.2, 8.1.8.3, and 8.1.8.5 with the spare's life summed first,
    which gives the same sum)."""
    panel_law, pump_law = stats.weibull_min(panel[0], scale=panel[1]), stats.weibull_min(pump[0], scale=pump[1])

    def pair(x):
        return 1 - pump_law.cdf(x) ** 2
    stage = pump_law.sf(t) + integrate.quad(lambda s: pump_law.pdf(s) * pair(t - s), 0, t,
                                            epsabs=0, epsrel=1e-12)[0]
    return panel_law.sf(t) * stage


def test_pumping_station_scenario_builds_its_system():
    sc = load_scenario("pumping-station-system")
    system = system_from_scenario(sc)
    panel, stage = system.parts
    assert system.kind == "series" and isinstance(panel, Component) and stage.kind == "standby"
    pair, spare = stage.parts
    assert pair.kind == "parallel" and len(pair.parts) == 2 and isinstance(spare, Component)
    t = np.array(sc.mission_times)
    np.testing.assert_allclose(system.reliability(t), [pumping_station_reference(x) for x in t], rtol=1e-10)


def test_pumping_station_parameters_reach_the_system():
    sc = load_scenario("pumping-station-system")
    system = system_from_scenario(sc, pump_eta=30000.0)
    assert system.reliability(8760.0) == pytest.approx(pumping_station_reference(8760.0, pump=(1.9, 30000.0)),
                                                       rel=1e-10)


def test_unknown_parameter_in_the_system_table_names_its_path():
    text = load_scenario("pumping-station-system").to_toml().replace('shape = "panel_beta"', 'shape = "panel_betta"')
    sc = scenario_from_toml(text)
    with pytest.raises(ModelError) as err:
        system_from_scenario(sc)
    assert err.value.field == "system.parts[0].params.shape" and "panel_betta" in err.value.reason


def test_system_spec_round_trips():
    system = system_from_scenario(load_scenario("pumping-station-system"))
    again = system_from_spec(system.spec())
    assert again.fingerprint() == system.fingerprint()
    np.testing.assert_array_equal(again.reliability([8760.0]), system.reliability([8760.0]))


def test_describe_names_each_part_and_rule():
    text = system_from_scenario(load_scenario("pumping-station-system")).describe()
    for words in ("pumping station", "control panel", "duty pump", "spare pump", "cold standby", "8.1.8.5"):
        assert words in text


def test_a_system_seen_as_a_target_passes_the_checks_against_its_own_draws():
    # The Target view (exact R, F, f from the structure) must agree with the
    # structure's own draws: KS at 3000 draws (the exact convolution costs
    # ~0.5 ms a point) and the life figures' intervals covering the exact values.
    from lifedraw.engine.scenarios import load_scenario
    from lifedraw.engine.systems import as_target, system_from_scenario

    system = system_from_scenario(load_scenario("pumping-station-system"))
    target = as_target(system)
    draws = system.sample(3000, 2026)
    assert stats.kstest(draws, target.cdf).pvalue > 1e-3
    exact = engine.exact_life_figures(target, [8760.0])
    summary = engine.life_summary(system.sample(200_000, 7), [8760.0])
    assert summary["mttf"]["lower"] <= exact["mttf"]["value"] <= summary["mttf"]["upper"]
    r = summary["reliability"][0]
    assert r["lower"] <= exact["reliability"][0]["value"] <= r["upper"]
    assert lifedraw.from_spec(target.spec()).system.spec() == system.spec()
