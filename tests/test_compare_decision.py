"""The method comparison decides (engine.compare): total cost = set-up + draws x cost per draw,
the number of draws where two methods cost the same, near-ties within the timing noise, and the
tolerance as a hard requirement; the measurement itself reports its repeats and spread.

The arithmetic references are closed forms: two cost lines s_a + n c_a and s_b + n c_b cross at
n* = (s_b - s_a)/(c_a - c_b). Speed itself is never asserted (house rule): only that the timing
figures are consistent with each other.
"""
import numpy as np
import pytest

import lifedraw
from lifedraw.engine import ModelError
from lifedraw.engine.compare import compare_methods, count_words, crossover, decide, total_seconds, within_noise


def row(method, setup_ms, ns, spread=0.05, u_error=None):
    c = ns * 1e-9
    return {"method": method, "applicable": True, "setup_ms": setup_ms, "seconds_per_draw": c,
            "seconds_per_draw_low": c * (1 - spread), "seconds_per_draw_high": c * (1 + spread),
            "u_error": u_error, "table_bytes": 4096, "repeats": 5}


# A: 10 ms set-up, 10 ns per draw; B: 1 ms set-up, 100 ns per draw. Lines cross at
# n* = (10 - 1) ms / (100 - 10) ns = 100,000 draws.
A, B = row("tabled", 10.0, 10.0), row("direct", 1.0, 100.0)


def test_total_cost_is_set_up_plus_draws_times_cost_per_draw():
    assert total_seconds(A, 1_000_000) == pytest.approx(0.010 + 1e6 * 10e-9)


def test_the_crossover_is_where_the_cost_lines_meet():
    assert crossover(A, B) == pytest.approx(100_000)
    assert total_seconds(A, 100_000) == pytest.approx(total_seconds(B, 100_000))
    assert crossover(A, row("worse", 20.0, 20.0)) is None      # dearer in both: never cheaper


def test_many_draws_pick_the_cheap_draw_and_say_where_the_other_wins():
    d = decide([A, B], 1_000_000, 1e-10)
    assert d.winner == "tabled"
    assert d.crossovers == [(100_000, "direct", "below")]
    assert "Below 100,000 draws, direct is cheaper overall." in d.sentence
    assert d.sentence.startswith("For 1 M draws")


def test_few_draws_pick_the_cheap_set_up_and_say_where_the_other_wins():
    d = decide([A, B], 10_000, 1e-10)
    assert d.winner == "direct"
    assert "Above 100,000 draws, tabled becomes cheaper overall." in d.sentence


def test_methods_within_the_timing_noise_are_named_as_such():
    close = row("close", 10.0, 10.4)                  # ranges 9.5-10.5 and 9.88-10.92 overlap
    assert within_noise(A, close)
    d = decide([A, close], 1_000_000, 1e-10)
    assert d.ties == ["close"] and "within the measurement noise" in d.sentence
    assert not within_noise(A, B)


def test_a_method_that_misses_the_tolerance_cannot_win():
    coarse = row("coarse", 0.1, 1.0, u_error=1e-8)
    d = decide([A, B, coarse], 1_000_000, 1e-10)
    assert d.winner == "tabled" and d.too_coarse == ["coarse"]
    assert decide([A, B, coarse], 1_000_000, 1e-6).winner == "coarse"


def test_nothing_measured_gives_no_winner_and_says_why():
    d = decide([{"method": "x", "applicable": False, "reason": "no"}], 1000, 1e-10)
    assert d.winner is None and "no method was measured" in d.sentence
    with pytest.raises(ModelError, match="draws"):
        decide([A], 0, 1e-10)


def test_counts_are_written_with_m_for_millions():
    assert count_words(60_000_000) == "60 M"
    assert count_words(2_500_000_000) == "2.5 G"
    assert count_words(40_000) == "40,000"


def test_a_measurement_times_several_repeats_and_reports_their_spread():
    target = lifedraw.family("weibull", shape=2.6, scale=31000)
    rows = compare_methods(target, n=30_000, rng=1, repeats=3, methods=["inversion", "table"])
    measured, refused = rows
    assert measured.applicable and measured.repeats == 3 and measured.batch == 10_000
    assert measured.seconds_per_draw_low <= measured.seconds_per_draw <= measured.seconds_per_draw_high
    assert measured.draws_per_second == pytest.approx(1 / measured.seconds_per_draw)
    assert measured.setup_ms > 0
    assert not refused.applicable and refused.reason
    with pytest.raises(ModelError, match="repeats"):
        compare_methods(target, n=30_000, repeats=1)
    assert np.isfinite(total_seconds(measured, 1e6))
