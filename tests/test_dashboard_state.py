"""The drawing board's per-session state without a browser (dashboard.state): refits on user
changes, keeps the last valid model on bad input, accumulates draws in bounded memory.

References: Weibull closed forms from the NIST/SEMATECH e-Handbook 8.1.6.2;
Kolmogorov-Smirnov and chi-square from scipy.stats; the reservoir sample from
Vitter (1985), whose every draw is kept with equal probability.
"""
import math

import numpy as np
import pytest
from scipy import special, stats

import lifedraw
from lifedraw.dashboard.state import (CdfTable, DrawAccumulator, DrawingBoard, histogram_edges, parse_assignments,
                             parse_support)
from lifedraw.engine import ModelError, Target
from lifedraw.engine.scenarios import scenario_from_toml

BAD_ROW_CSV = "time,suspended\n5200,0\n8100,maybe\n9400,1\n"


@pytest.fixture
def bench():
    return DrawingBoard("gearbox-wearout", batch_size=10_000)


# ---- refits --------------------------------------------------------------------------------

def test_moving_a_parameter_refits_the_model(bench):
    before = bench.version
    assert bench.set_value("beta", 3.4)
    assert bench.target.params["shape"] == 3.4
    assert bench.sampler.target is bench.target
    assert bench.version == before + 1


def test_a_refit_restarts_the_stream_with_one_batch(bench):
    bench.step()
    bench.set_value("eta", 40_000)
    assert bench.n == bench.batch_size
    assert len(bench.trace["n"]) == 1


def test_the_same_seed_gives_the_same_first_batch():
    a, b = DrawingBoard("gearbox-wearout"), DrawingBoard("gearbox-wearout")
    np.testing.assert_array_equal(a.acc.x, b.acc.x)


def test_changing_the_method_refits_with_that_method():
    wb = DrawingBoard("sensor-bathtub")
    wb.method = "composition"
    assert wb.sampler.method == "composition"
    assert "method" not in wb.errors


def test_a_new_scenario_brings_its_own_run_settings():
    wb = DrawingBoard("gearbox-wearout")
    wb.scenario_name = "kiln-fan-belts"
    assert wb.scenario.name == "kiln-fan-belts"
    assert wb.seed == 4102                       # scenarios/kiln-fan-belts.toml, [run] seed
    assert set(wb.values) == {"beta", "eta", "gamma"}


def test_a_family_typed_in_the_editor_becomes_the_model_with_a_slider_per_parameter(bench):
    assert bench.apply_family("lognormal", "mu = 9.5, sigma = 0.4")
    assert bench.target.params == {"mu": 9.5, "sigma": 0.4, "location": 0.0}
    assert set(bench.scenario.parameters) == {"mu", "sigma"}


def test_a_formula_typed_in_the_editor_becomes_the_model(bench):
    # exp(-t/s)/s is the exponential density, mean s (NIST e-Handbook 8.1.6.1).
    assert bench.apply_formula("density", "exp(-t/s)/s", "0, inf", "s = 1500")
    assert bench.target.mean() == pytest.approx(1500, rel=1e-6)


# ---- bad input keeps the last valid model -----------------------------------------------------

def test_a_bad_parameter_keeps_the_last_model_and_says_why(bench):
    target, sampler = bench.target, bench.sampler
    assert not bench.set_value("beta", -1.0)
    assert bench.target is target and bench.sampler is sampler
    assert "shape" in bench.errors["parameters"] and "> 0" in bench.errors["parameters"]


def test_a_bad_formula_keeps_the_last_model_and_says_why(bench):
    target = bench.target
    assert not bench.apply_formula("density", "t**(k - 1)*exp(", "0, inf", "k = 2")
    assert bench.target is target
    assert bench.errors["model"].startswith("model.formula:")


def test_a_method_that_cannot_serve_the_model_is_reported_at_the_method(bench):
    sampler = bench.sampler
    bench.method = "table"
    assert bench.sampler is sampler
    assert bench.errors["method"].startswith("table: ")


def test_a_bad_upload_names_the_row_and_keeps_the_model(bench):
    target = bench.target
    assert not bench.load_field_data(BAD_ROW_CSV, "bushings.csv")
    assert bench.target is target
    assert bench.errors["upload"].startswith("row 3: ")


def test_an_unexpected_exception_becomes_a_short_message(bench, monkeypatch):
    def boom(*args, **kwargs):
        raise RuntimeError("internal detail")
    monkeypatch.setattr(type(bench.scenario), "with_values", boom)
    assert not bench.set_value("beta", 3.0)
    assert "RuntimeError" in bench.errors["parameters"]
    assert "internal detail" not in bench.errors["parameters"]


def test_a_good_change_clears_the_message_of_the_bad_one(bench):
    bench.set_value("beta", -1.0)
    bench.set_value("beta", 2.0)
    assert "parameters" not in bench.errors


def test_a_good_upload_becomes_the_product_limit_model(bench):
    text = "time,suspended\n5200,0\n8100,0\n9400,1\n11800,0\n"
    assert bench.load_field_data(text, "bushings.csv")
    reference = lifedraw.failure_times([5200, 8100, 9400, 11800], [False, False, True, False])
    np.testing.assert_allclose(bench.target.sf([6000, 10000, 12000]), reference.sf([6000, 10000, 12000]))


# ---- the stream --------------------------------------------------------------------------------

def test_batches_accumulate(bench):
    bench.step()
    bench.step()
    acc = bench.acc
    assert bench.n == 3 * bench.batch_size
    assert acc.counts.sum() + acc.below + acc.above == bench.n
    assert len(bench.trace["ks_p"]) == 3


def test_the_stream_stops_at_the_requested_size(bench):
    bench.stop_at = 25_000
    bench.start()
    while bench.running:
        bench.step()
    assert bench.n == 25_000


def test_reset_clears_the_draws(bench):
    bench.step()
    bench.reset()
    assert bench.n == 0
    assert bench.acc.counts.sum() == 0 and bench.acc.x.size == 0
    assert bench.trace["n"] == [] and not bench.running


def test_two_drawing_boards_do_not_share_state():
    a, b = DrawingBoard("gearbox-wearout"), DrawingBoard("gearbox-wearout")
    a.set_value("beta", 4.0)
    a.set_value("eta", -5.0)
    assert b.target.params["shape"] == 2.6
    assert b.errors == {}
    assert a.acc is not b.acc and a.trace is not b.trace


# ---- statistics of the accumulated draws ------------------------------------------------------

def test_the_reservoir_is_a_uniform_sample_of_all_draws():
    # Feed 0, 1, ..., N-1 in batches: a uniform reservoir holds values uniform on [0, N).
    # KS against U(0, 1) at alpha = 0.001 with a fixed seed (scipy.stats.kstest).
    target = lifedraw.family("exponential", scale=1.0)
    table = CdfTable(target, np.linspace(0.01, 5, 100))
    acc = DrawAccumulator(np.linspace(0, 5, 11), table, capacity=2_000, rng=7)
    n = 100_000
    for start in range(0, n, 7_000):
        acc.add(np.arange(start, min(start + 7_000, n), dtype=float))
    assert acc.n == n and acc.x.size == 2_000
    assert stats.kstest(acc.x / n, "uniform").pvalue > 1e-3


def test_the_live_ks_statistic_matches_scipy_with_the_exact_cdf():
    wb = DrawingBoard("compressor-density")          # a density formula: numerical cdf, interpolated live
    d, _ = wb.ks()
    # The outside cdf: t^(k-1) exp(-(t/s)^p) with k = 2.5, p = 1.6, s = 9000 is scipy's
    # gengamma(a = k/p, c = p, scale = s) (Stacy's generalised gamma), not the model's own cdf.
    reference = stats.kstest(wb.acc.x, stats.gengamma(2.5 / 1.6, 1.6, scale=9000.0).cdf).statistic
    # The table is exact at its nodes and errs by less than 1e-5 between them.
    assert d == pytest.approx(reference, abs=1e-5)


def test_the_cdf_table_is_close_to_the_exact_cdf_at_every_draw():
    wb = DrawingBoard("streetlight-driver-hazard")
    x = wb.acc.x
    # Outside reference: h = a b t^(b-1) + c + d e^(t/tau) integrates to
    # H = a t^b + c t + d tau (e^(t/tau) - 1), F = 1 - exp(-H) (NIST/SEMATECH e-Handbook 8.1.2.4),
    # with the scenario's a = 0.004, b = 0.5, c = 4e-6, d = 2e-7, tau = 15000.
    exact = -np.expm1(-(0.004 * x**0.5 + 4e-6 * x + 2e-7 * 15000.0 * np.expm1(x / 15000.0)))
    assert np.max(np.abs(wb.table.cdf(x) - exact)) < 1e-5


def test_the_binned_counts_follow_the_models_bin_masses():
    # Pearson chi-square (scipy.stats.chisquare), bins merged until each expects >= 5.
    wb = DrawingBoard("gearbox-wearout")
    data = wb.histogram_data()
    # Bin masses from scipy's Weibull (shape 2.6, scale 31000), not from the model's own cdf; the
    # page's expected shares must equal them too.
    masses = np.diff(stats.weibull_min(2.6, scale=31_000.0).cdf(data["edges"]))
    np.testing.assert_allclose(data["expected"], masses, rtol=0, atol=1e-12)
    expected = masses * wb.n
    observed = data["counts"].astype(float)
    keep = expected >= 5
    obs = np.append(observed[keep], observed[~keep].sum() + data["above"] + data["below"])
    exp = np.append(expected[keep], wb.n - expected[keep].sum())
    assert stats.chisquare(obs, exp).pvalue > 1e-3


def test_histogram_edges_start_at_the_failure_free_period():
    target = lifedraw.family("weibull", shape=1.8, scale=4200, location=1200)
    table = CdfTable(target, target.quantile(np.linspace(0.001, 0.999, 999)))
    edges, view_right = histogram_edges(target, table)
    assert edges[0] == 1200
    # Weibull quantile t_p = gamma + eta (-ln(1 - p))^(1/beta)  (NIST e-Handbook 8.1.6.2)
    assert view_right == pytest.approx(1200 + 4200 * (-math.log(5e-4)) ** (1 / 1.8), rel=1e-3)


def test_exact_life_figures_are_the_weibull_closed_forms(bench):
    # MTTF = eta * Gamma(1 + 1/beta), R(t) = exp(-(t/eta)^beta)  (NIST e-Handbook 8.1.6.2)
    figs = bench.life_figures()
    assert figs["exact"]["mttf"]["value"] == pytest.approx(31_000 * special.gamma(1 + 1 / 2.6), rel=1e-9)
    assert figs["exact"]["reliability"][0]["value"] == pytest.approx(math.exp(-(8760 / 31_000) ** 2.6))


def test_the_draws_mttf_interval_covers_the_exact_value(bench):
    figs = bench.life_figures()
    m = figs["sample"]["mttf"]
    assert m["lower"] <= figs["exact"]["mttf"]["value"] <= m["upper"]


# ---- comparison and saving ------------------------------------------------------------------------

def test_the_comparison_measures_every_method_or_says_why_not(bench):
    rows = bench.run_comparison(n=20_000)
    assert {r.method for r in rows} == set(bench.param.method.objects) - {"auto"}
    for r in rows:
        assert (r.draws_per_second or 0) > 0 if r.applicable else r.reason


def test_the_saved_scenario_reloads_with_the_current_settings(bench):
    bench.set_value("beta", 3.3)
    bench.seed = 77
    again = scenario_from_toml(bench.scenario_toml(), "again")
    assert again.parameters["beta"].value == 3.3
    assert again.seed == 77
    assert again.target().params["shape"] == 3.3


# ---- editor parsing ----------------------------------------------------------------------------

def test_assignments_are_read_as_numbers():
    assert parse_assignments("k = 2.5, s=9000; p = 1e-3") == {"k": 2.5, "s": 9000.0, "p": 0.001}


def test_an_assignment_without_a_number_is_refused():
    with pytest.raises(ModelError) as info:
        parse_assignments("k = two")
    assert info.value.field == "parameters"


def test_support_ends_accept_inf():
    assert parse_support("0, inf") == [0.0, "inf"]
    with pytest.raises(ModelError):
        parse_support("0")


def test_a_system_scenario_gets_system_life_figures_that_cover_the_exact_values():
    # The pumping station's [system] table: exact figures from the structure
    # (NIST e-Handbook 8.1.8 rules) inside the Monte Carlo intervals.
    from lifedraw.dashboard.state import DrawingBoard
    wb = DrawingBoard("pumping-station-system")
    figs = wb.system_figures(n=50_000)
    assert figs is not None and figs["exact"]["mttf"]["value"] > 0
    m = figs["sample"]["mttf"]
    assert m["lower"] <= figs["exact"]["mttf"]["value"] <= m["upper"]


def test_a_plain_scenario_has_no_system_figures():
    from lifedraw.dashboard.state import DrawingBoard
    assert DrawingBoard("gearbox-wearout").system_figures() is None


@pytest.mark.parametrize("name", __import__("lifedraw.engine.scenarios", fromlist=["scenario_names"]).scenario_names())
def test_every_scenario_feeds_every_cell(name):
    # What `make run` shows for each scenario: a batch of draws, the histogram
    # against the model, QQ/PP data, the method's geometry, the counters and the
    # life figures, with no error filed on the way.
    from lifedraw.dashboard.state import DrawingBoard
    wb = DrawingBoard(name)
    assert wb.step() > 0
    assert wb.histogram_data() and wb.qq_data()
    assert wb.geometry().get("method") == wb.sampler.method
    assert wb.counters()["samples"] > 0
    figs = wb.life_figures()
    assert figs["exact"] is not None and figs["sample"] is not None
    assert wb.errors == {}
