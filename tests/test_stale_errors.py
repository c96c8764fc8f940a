"""A new, valid input clears the messages of earlier bad ones (issue 14, low: "the page keeps a stale
error after a new, valid input"): once a model runs, the editor and the sliders show it, so a message
about an input that is no longer there would mislead. Checked on the session state, without a browser.
"""
from __future__ import annotations

import pytest

from lifedraw.dashboard.state import DrawingBoard
from lifedraw.engine import ModelError

BAD_ROW_CSV = "time,suspended\n5200,0\n8100,maybe\n9400,1\n"


@pytest.fixture(scope="module")
def bench():
    return DrawingBoard("gearbox-wearout", batch_size=2_000)


@pytest.mark.parametrize("make_error, group", [
    (lambda b: b.apply_formula("density", "t**(k - 1)*exp(", "0, inf", "k = 2"), "model"),
    (lambda b: b.load_field_data(BAD_ROW_CSV, "bushings.csv"), "upload"),
    (lambda b: b.set_value("beta", -1.0), "parameters"),
])
def test_a_valid_slider_move_clears_an_earlier_bad_input(bench, make_error, group):
    assert not make_error(bench)
    assert group in bench.errors
    assert bench.set_value("beta", 2.8)
    assert bench.errors == {}


def test_a_refit_clears_the_message_of_a_failed_comparison(bench):
    bench.set_comparison(ModelError("comparison", "could not measure"), 1000)
    assert "comparison" in bench.errors
    bench.method = "inversion"
    assert "comparison" not in bench.errors
