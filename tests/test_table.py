"""The table method (engine/methods/table.py): both table builders and both pickers.

References: Walker (1977), ACM TOMS 3(3) 253-256 -- column i is kept with probability keep[i]
and otherwise gives its alias, so P(i) = (keep[i] + sum over columns j aliased to i of
(1 - keep[j])) / k; Chen & Asau (1974) -- guide[j] is the first bin whose cumulative upper end
exceeds j/size, written out here as a plain loop; the histogram and product-limit laws from
tests/references.py (closed form; scipy.stats.ecdf with scipy's censored Weibull tail).
"""
import numpy as np
import pytest
from references import histogram as histogram_reference
from references import hydro_gate_bushings, verdict

import lifedraw
from lifedraw import engine
from lifedraw.engine import ModelError
from lifedraw.engine.methods.table import TableSampler, alias_table, guide_table
from lifedraw.engine.scenarios import load_scenario

SEED = 1977


def walker_probabilities(keep, alias):
    k = keep.size
    p = keep.copy()
    np.add.at(p, alias, 1.0 - keep)
    return p / k


@pytest.mark.parametrize("p", [
    np.array([0.1, 0.2, 0.3, 0.4]),
    np.array([14, 6, 5, 7, 9, 13, 19, 26, 31, 27, 18, 9], dtype=float),
    np.array([0.0, 0.5, 0.0, 0.5, 0.0]),
    np.array([1.0]),
    np.random.default_rng(3).dirichlet(np.full(1000, 0.2)),
], ids=["four", "e-bike counts", "zeros", "one bin", "1000 skewed"])
def test_alias_table_reproduces_every_probability(p):
    keep, alias = alias_table(p)
    assert keep.shape == alias.shape == p.shape
    assert np.all((keep >= 0) & (keep <= 1)) and np.all((alias >= 0) & (alias < p.size))
    np.testing.assert_allclose(walker_probabilities(keep, alias), p / p.sum(), rtol=0, atol=1e-14)


def test_alias_table_never_sends_a_column_to_an_empty_bin():
    p = np.array([0.0, 0.5, 0.0, 0.5, 0.0])
    keep, alias = alias_table(p)
    assert np.all(keep[p == 0] == 0) and np.all(p[alias[keep < 1]] > 0)


@pytest.mark.parametrize("p, size", [(np.array([0.1, 0.2, 0.3, 0.4]), 4), (np.array([0.5, 0.0, 0.5]), 7),
                                     (np.random.default_rng(4).dirichlet(np.ones(50)), 50)])
def test_guide_table_points_at_the_first_bin_ending_above_each_level(p, size):
    cumulative = np.concatenate([[0.0], np.cumsum(p)])
    cumulative[-1] = 1.0
    want = []
    for j in range(size):                       # the definition, one level at a time
        level = j / size
        want.append(next(i for i in range(p.size) if cumulative[i + 1] > level))
    assert guide_table(cumulative, size).tolist() == want


def ebike(picker):
    return engine.fit(load_scenario("ebike-battery-returns").target(), "table", picker=picker)


@pytest.mark.parametrize("picker", ["alias", "guide"])
def test_both_pickers_draw_the_histogram_law(picker):
    # The suite's verdict (tests/references.py) at n = 1e5 against the closed-form histogram law;
    # it rejects a bin share x1.25 with either picker (tests/test_fault_injection.py).
    passed, why = verdict(ebike(picker), histogram_reference(), 100_000, SEED)
    assert passed, why


@pytest.mark.parametrize("picker", ["alias", "guide"])
def test_both_pickers_draw_the_product_limit_law_with_its_tail(picker):
    s = engine.fit(load_scenario("hydro-gate-bushings").target(), "table", picker=picker)
    passed, why = verdict(s, hydro_gate_bushings(), 100_000, SEED)
    assert passed, why


@pytest.mark.parametrize("picker, per_draw", [("alias", 3.0), ("guide", 2.0)])
def test_uniforms_per_draw_of_each_picker(picker, per_draw):
    # Alias: a column and a coin (Walker 1977); guide table: one uniform (Chen & Asau 1974);
    # then one uniform to place the draw within its bin.
    s = ebike(picker)
    s.sample(10_000, SEED)
    assert s.stats["uniforms_per_sample"] == per_draw and s.stats["picker"] == picker


def test_guide_picker_never_draws_an_empty_bin():
    target = lifedraw.binned_counts([0.0, 1.0, 2.0, 3.0, 4.0, 5.0], [0, 4, 0, 6, 0])
    x = engine.fit(target, "table", picker="guide").sample(200_000, SEED)
    assert np.all(((x >= 1) & (x <= 2)) | ((x >= 3) & (x <= 4)))


def test_an_unknown_picker_is_a_model_error():
    with pytest.raises(ModelError) as err:
        ebike("linear")
    assert err.value.field == "picker"


def test_a_saved_guide_table_sampler_reloads_with_its_picker(tmp_path):
    s = ebike("guide")
    s.save(tmp_path / "t.lds")
    loaded = engine.load(tmp_path / "t.lds")
    assert loaded.picker == "guide"
    np.testing.assert_array_equal(loaded.sample(10_000, 5), s.sample(10_000, 5))
