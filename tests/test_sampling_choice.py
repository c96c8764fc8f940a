"""How a method is chosen and compared: ``fit(method="auto")``'s rules and the reason it gives,
``applicable_methods``, and ``compare_methods``.

References: the rules stated in engine/sampling.py's docstring (binned or discrete data -> table;
a closed-form F^-1 -> inversion; a mixture -> the faster of composition and inversion, measured;
otherwise numerical inversion) and, for the costs compare_methods reports, the methods' own
theory: exact inversion uses one uniform per draw (Devroye 1986, II.2), the alias table two
uniforms to pick a bin plus one to place the draw (Walker 1977), rejection accepts with
probability 1/hat area (Devroye 1986, II.3).
"""
import math

import numpy as np
import pytest

import lifedraw
from lifedraw import engine
from lifedraw.engine import ModelError, sampling
from lifedraw.engine.compare import compare_methods, format_table
from lifedraw.engine.errors import MethodNotApplicable
from lifedraw.engine.methods import METHODS
from lifedraw.engine.methods.composition import Composition
from lifedraw.engine.methods.inversion import Inversion, NumericalInversion
from lifedraw.engine.methods.table import TableSampler
from lifedraw.engine.sampling import applicable_methods


def weibull():
    return lifedraw.family("weibull", shape=2.0, scale=100.0)


def bathtub():
    return lifedraw.mixture([lifedraw.family("weibull", shape=0.55, scale=40.0),
                             lifedraw.family("exponential", scale=2400.0)], [0.3, 0.7])


HISTOGRAM = dict(edges=[0.0, 10.0, 20.0, 40.0], counts=[5, 12, 3])


# ---- auto's rules and its reason --------------------------------------------------------------------

def test_binned_data_gets_the_table_and_says_why():
    s = engine.fit(lifedraw.binned_counts(**HISTOGRAM))
    assert isinstance(s, TableSampler)
    assert s.reason.startswith("binned or discrete data: an alias table")


def test_failure_times_get_the_table():
    s = engine.fit(lifedraw.failure_times([5.0, 8.0, 12.0, 20.0], [False, True, False, False]))
    assert isinstance(s, TableSampler) and "binned or discrete data" in s.reason


def test_a_smooth_histogram_is_continuous_so_it_gets_numerical_inversion():
    s = engine.fit(lifedraw.binned_counts(**HISTOGRAM, smooth=True))
    assert isinstance(s, NumericalInversion)
    assert s.reason.startswith("no closed-form inverse: numerical inversion")


def test_a_closed_form_inverse_gets_exact_inversion_and_says_so():
    s = engine.fit(weibull())
    assert type(s) is Inversion and s.stats["variant"] == "closed form"
    assert "inverse CDF is known exactly" in s.reason and "no set-up" in s.reason


def test_residual_life_of_a_family_keeps_the_closed_form():
    s = engine.fit(weibull().given_survival(50.0))
    assert type(s) is Inversion and "known exactly" in s.reason


def test_a_formula_without_closed_form_inverse_gets_numerical_inversion():
    s = engine.fit(lifedraw.density_formula("t**1.5*exp(-(t/10)**2.5)"))
    assert isinstance(s, NumericalInversion)
    assert "no closed-form inverse" in s.reason and "u-error within the tolerance" in s.reason


@pytest.mark.parametrize("inversion_rate, composition_rate, winner", [(5e7, 2e7, "inversion"),
                                                                     (2e7, 5e7, "composition")])
def test_a_mixture_gets_the_method_measured_faster_and_both_rates_are_stated(
        monkeypatch, inversion_rate, composition_rate, winner):
    # The rule is "the faster on a measured batch"; the measurement is replaced by fixed rates so
    # the rule itself is tested deterministically (timing is not asserted anywhere).
    rates = {NumericalInversion: inversion_rate, Composition: composition_rate}
    monkeypatch.setattr(sampling, "_throughput", lambda s: rates[type(s)])
    s = engine.fit(bathtub())
    assert s.method == winner
    assert s.reason.startswith("a mixture: ")
    assert f"{inversion_rate / 1e6:.1f} M/s" in s.reason and f"{composition_rate / 1e6:.1f} M/s" in s.reason


def test_a_requested_method_says_it_was_requested():
    assert engine.fit(weibull(), "rejection").reason == "rejection was requested"
    assert engine.fit(weibull(), " Inversion ").reason == "inversion was requested"


# ---- applicable_methods -------------------------------------------------------------------------------

def test_applicable_methods_lists_every_method_with_none_or_a_reason():
    out = applicable_methods(weibull())
    assert list(out) == list(METHODS)
    assert out["inversion"] is None and out["rejection"] is None and out["ratio-of-uniforms"] is None
    assert "binned or discrete" in out["table"]
    assert "not a mixture" in out["composition"]


@pytest.mark.parametrize("make", [weibull, bathtub, lambda: lifedraw.binned_counts(**HISTOGRAM),
                                  lambda: lifedraw.failure_times([5.0, 8.0, 12.0, 20.0]),
                                  lambda: lifedraw.family("weibull", shape=0.5, scale=10.0)],
                         ids=["weibull", "mixture", "histogram", "failure times", "weibull with a pole"])
def test_applicable_methods_agrees_with_what_fit_does(make):
    # Each method named applicable builds; each refused one raises MethodNotApplicable with
    # the same reason.
    target = make()
    for name, reason in applicable_methods(target).items():
        if reason is None:
            assert engine.fit(target, name).method in (name, "ratio-of-uniforms")
        else:
            with pytest.raises(MethodNotApplicable) as err:
                engine.fit(target, name)
            assert err.value.reason == reason


def test_the_mixture_can_be_drawn_by_composition_but_not_by_the_table():
    out = applicable_methods(bathtub())
    assert out["composition"] is None and out["inversion"] is None
    assert out["table"] is not None


# ---- compare_methods ---------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def weibull_rows():
    return compare_methods(weibull(), n=30_000, rng=3)


def test_compare_has_one_row_per_method_in_order(weibull_rows):
    assert [r.method for r in weibull_rows] == list(METHODS)
    assert [r.applicable for r in weibull_rows] == [v is None for v in applicable_methods(weibull()).values()]


def test_compare_rows_of_applicable_methods_are_measured(weibull_rows):
    for r in weibull_rows:
        if r.applicable:
            assert r.draws_per_second > 0 and r.setup_ms >= 0 and r.reason == f"{r.method} was requested"


def test_compare_rows_of_refused_methods_carry_the_reason(weibull_rows):
    reasons = applicable_methods(weibull())
    for r in weibull_rows:
        if not r.applicable:
            assert r.reason == reasons[r.method] and r.draws_per_second is None


def test_compare_counts_follow_each_methods_theory(weibull_rows):
    rows = {r.method: r for r in weibull_rows}
    # Exact inversion: one uniform and no density per draw.
    assert rows["inversion"].uniforms_per_sample == 1.0
    assert rows["inversion"].density_evals_per_sample == 0.0
    # Rejection: acceptance 1/hat area, at least the default 90 % goal (engine docs). One uniform
    # per candidate, and a second for every candidate not accepted at once below its row's squeeze
    # floor (immediate acceptance, engine/methods/rejection_drawing.py), which includes every
    # candidate the squeeze did not accept: so at least (2 - squeeze rate)/acceptance and at most
    # 2/acceptance per draw; a batch proposes about 2 % more candidates than it needs and discards
    # the surplus, hence 1.03.
    rej = rows["rejection"]
    assert 0.9 <= rej.acceptance_rate <= 1.0
    assert ((2.0 - rej.squeeze_rate) / rej.acceptance_rate <= rej.uniforms_per_sample
            <= 1.03 * 2.0 / rej.acceptance_rate)


def test_compare_of_a_histogram_counts_three_uniforms_per_table_draw():
    rows = {r.method: r for r in compare_methods(lifedraw.binned_counts(**HISTOGRAM), n=3000, rng=1)}
    # Alias table (Walker 1977): a column and a coin to pick the bin, one uniform within it.
    assert rows["table"].uniforms_per_sample == 3.0
    assert rows["inversion"].uniforms_per_sample == 1.0
    assert not rows["rejection"].applicable


def test_compare_of_a_subset_and_its_table():
    rows = compare_methods(bathtub(), n=3000, methods=["composition", "table"])
    assert [r.method for r in rows] == ["composition", "table"]
    text = format_table(rows)
    assert text.splitlines()[0].split()[0] == "method"
    assert "table              not applicable: the table method serves binned" in text
    assert math.isfinite(rows[0].draws_per_second)


@pytest.mark.parametrize("call, field", [(lambda: compare_methods("weibull"), "target"),
                                         (lambda: compare_methods(weibull(), n=999), "n")])
def test_compare_refuses_bad_input_naming_the_field(call, field):
    with pytest.raises(ModelError) as err:
        call()
    assert err.value.field == field


def test_compare_draws_from_the_given_seed_so_the_counts_repeat():
    a = compare_methods(weibull(), n=3000, rng=5, methods=["rejection"])[0]
    b = compare_methods(weibull(), n=3000, rng=5, methods=["rejection"])[0]
    assert a.acceptance_rate == b.acceptance_rate and a.uniforms_per_sample == b.uniforms_per_sample
    assert np.isfinite(a.u_error) if a.u_error is not None else True
