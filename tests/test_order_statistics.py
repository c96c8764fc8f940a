"""Specifications for engine.order_statistics: exact order statistics of a chunked sample in one
pass with rank windows, and the radix select it falls back on.

The reference for every value is numpy's own np.sort of the same draws in memory; for every
figure, life_summary of the in-memory array (np.partition). Values must agree to the last bit:
an order statistic is a draw, not an estimate.
"""
import tracemalloc

import numpy as np
import pytest

da = pytest.importorskip("dask.array")
dask = pytest.importorskip("dask")

from lifedraw.engine import family, fit, order_statistics, rank_windows
from lifedraw.engine.errors import ModelError
from lifedraw.engine.generate import generate
from lifedraw.engine.life import life_summary

SEED = 20261202


def draws(n, seed=SEED):
    # numpy's Weibull generator, an outside reference: shape 1.8, scale 1200.
    return 1200.0 * np.random.default_rng(seed).weibull(1.8, n)


def some_ranks(n):
    """Both ends, the B-life neighbourhoods and an odd one, 0-based."""
    return [0, 1, n // 100, n // 100 + 1, n // 10, n // 2, n // 2 + 1, (2 * n) // 3, n - 2, n - 1]


def select(x, ranks_of=some_ranks, times=(500.0,)):
    return order_statistics.chunked_pass(x, np.asarray(times, dtype=float), ranks_of)


def assert_exact(values, x):
    xs = np.sort(np.asarray(x))
    for k, v in values.items():
        assert v == xs[k], (k, v, xs[k])


def assert_same_figures(chunked, in_memory):
    assert chunked["b_lives"] == in_memory["b_lives"]
    assert chunked["reliability"] == in_memory["reliability"]
    for key in ("estimate", "lower", "upper"):
        # The mean is the same sum in another order (Chan et al. 1983 merging): equal to rounding.
        assert chunked["mttf"][key] == pytest.approx(in_memory["mttf"][key], rel=1e-12)


# ---- one pass ---------------------------------------------------------------------------------

def test_one_pass_gives_the_sorted_samples_order_statistics():
    x = draws(300_001)
    stats, values, computation = select(da.from_array(x, chunks=40_000))
    assert sorted(values) == sorted(set(some_ranks(x.size)))
    assert_exact(values, x)
    assert computation["passes"] == 1 and "fallback_ranks" not in computation
    assert stats.survivors[0] == np.count_nonzero(x > 500.0)
    assert stats.sd == pytest.approx(np.std(x, ddof=1), rel=1e-12)


def test_a_shard_folder_gives_the_sorted_samples_order_statistics_in_one_pass(tmp_path):
    sampler = fit(family("weibull", shape=1.8, scale=1200.0))
    folder = tmp_path / "shards"
    x = generate(sampler, 150_000, chunk=20_000, seed=5, out=folder).compute(scheduler="sync")
    figures = life_summary(str(folder), [500.0])
    assert figures["passes"] == 1
    assert_same_figures(figures, life_summary(x, [500.0]))
    xs = np.sort(x)
    # B10's interval ends are x_(r), x_(s) of the sorted draws (Hahn & Meeker 1991, §5.2).
    from scipy import stats
    r = int(stats.binom.ppf(0.025, x.size, 0.10))
    s = int(stats.binom.ppf(0.975, x.size, 0.10)) + 1
    assert (figures["b_lives"]["B10"]["lower"], figures["b_lives"]["B10"]["upper"]) == (xs[r - 1], xs[s - 1])


def test_the_kept_draws_are_a_small_share_of_a_large_sample():
    # Windows of WINDOW_Z = 5 standard errors of a 2 x 50,000-draw pilot's quantiles: about
    # 2·5·(0.099 + 0.3 + 0.5)/sqrt(100,000) = 2.8 % of the draws (rank_windows.py).
    x = draws(1_000_000)
    _, values, computation = select(da.from_array(x, chunks=50_000))
    assert_exact(values, x)
    assert 0 < computation["kept"] < 0.05 * x.size


def test_windows_from_alike_chunks_hold_the_ranks_sample_after_sample():
    # For chunks drawn alike a window misses with probability about Φ(-5) = 3e-7 per side
    # (rank_windows.py), so 25 samples x 6 windows should show no miss at all. Windows one
    # standard error wide (WINDOW_Z = 1) left 23 wanted ranks outside at these seeds (measured).
    misses = 0
    for seed in range(25):
        x = draws(60_000, seed)
        _, values, computation = select(da.from_array(x, chunks=6_000))
        misses += computation.get("fallback_ranks", 0) + ("windows" not in computation)
        assert_exact(values, x)
    assert misses == 0


# ---- every way the windows can miss, and the exact values all the same ---------------------------

def test_a_window_too_narrow_falls_back_to_the_radix_select(monkeypatch):
    # WINDOW_Z = 0: each window holds barely more than the pilot's own estimate, so the exact
    # ranks of the whole sample lie outside it (at this seed, for all but the extremes, whose
    # windows are open at one end). One pilot chunk: with two, windows this narrow would not
    # even overlap, and the chunks would count as unlike (the test below).
    monkeypatch.setattr(rank_windows, "WINDOW_Z", 0.0)
    x = draws(200_003)
    with dask.config.set(num_workers=1):
        _, values, computation = select(da.from_array(x, chunks=25_000))
    assert computation["fallback_ranks"] >= len(set(some_ranks(x.size))) - 4
    assert computation["passes"] == 3
    assert_exact(values, x)


def test_sorted_data_misleads_a_single_pilot_chunk_and_still_gives_exact_values():
    # Sorted draws: the first chunk holds the smallest tenth, so its quantiles put every
    # window far too low; the counts show it and the radix select finds the ranks.
    x = np.sort(draws(100_000))
    with dask.config.set(num_workers=1):
        _, values, computation = select(da.from_array(x, chunks=10_000))
    assert computation["pilot_chunks"] == 1
    assert computation["fallback_ranks"] >= len(set(some_ranks(x.size))) - 4
    assert_exact(values, x)


def test_sorted_data_makes_two_pilot_chunks_disagree_so_the_radix_passes_run():
    x = np.sort(draws(100_000))
    with dask.config.set(num_workers=2):
        _, values, computation = select(da.from_array(x, chunks=10_000))
    assert "windows" not in computation and computation["passes"] == 2
    assert_exact(values, x)


def test_a_chunk_crowding_a_window_keeps_nothing_so_memory_stays_bounded(monkeypatch):
    # The bound: every chunk keeps at most its room, every merge at most WINDOW_KEEP_LIMIT draws,
    # so no task and not the caller ever holds more kept draws than that. Here a late chunk of
    # 20,000 copies of the median would overfill the windows; it keeps none and the ranks come
    # from the radix select (which keeps at most KEEP_LIMIT), still exact.
    monkeypatch.setattr(order_statistics, "WINDOW_KEEP_LIMIT", 40_000)
    monkeypatch.setattr(order_statistics, "KEEP_LIMIT", 40_000)
    x = draws(200_000)
    x[150_000:170_000] = np.median(x[:40_000])
    _, values, computation = select(da.from_array(x, chunks=20_000))
    assert computation["fallback_ranks"] > 0
    assert computation["kept"] <= 40_000 + 40_000                    # window pass, then radix pass
    assert_exact(values, x)


def traced_peak(fn):
    """Peak bytes traced by tracemalloc (numpy's buffers included) while fn() runs on 2 threads."""
    tracemalloc.start()
    try:
        with dask.config.set(scheduler="threads", num_workers=2):
            result = fn()
        return result, tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def test_life_summary_of_lazy_draws_holds_a_few_chunks_not_the_sample():
    # 8 M lazily drawn values (64 MB) in chunks of 100,000 (0.8 MB). The reference is the
    # peak of summing the same draws (the drawing's own chunks and temporaries); life_summary
    # may add the 2 held pilot chunks (1.6 MB) and the kept draws (about 2 % of the sample,
    # 1.3 MB, rank_windows.py), so 4 MB more at most - holding the sample would be 64 MB.
    sampler = fit(family("weibull", shape=1.8, scale=1200.0))
    x = generate(sampler, 8_000_000, chunk=100_000, seed=9)
    life_summary(generate(sampler, 200_000, chunk=100_000, seed=9))       # imports and compiles first
    _, reference = traced_peak(lambda: x.sum().compute())
    figures, peak = traced_peak(lambda: life_summary(x, [500.0]))
    assert figures["passes"] == 1
    assert peak < reference + 4e6, f"{peak / 1e6:.1f} MB against {reference / 1e6:.1f} MB for a sum"


# ---- the same figures as the radix passes and as memory -------------------------------------------

def test_unknown_chunk_sizes_use_the_radix_passes_and_give_the_same_figures():
    x = draws(120_000)
    known = da.from_array(x, chunks=15_000)
    unknown = known[known > -1.0]                       # every draw, chunk sizes unknown to dask
    assert np.isnan(unknown.shape[0])
    by_windows, by_radix = life_summary(known, [500.0]), life_summary(unknown, [500.0])
    assert (by_windows["passes"], by_radix["passes"]) == (1, 2)
    assert_same_figures(by_windows, by_radix)
    assert_same_figures(by_windows, life_summary(x, [500.0]))


@pytest.mark.parametrize("where", [0, 99_990], ids=["in the first chunk", "in the last chunk"])
def test_nan_anywhere_is_refused_naming_samples(where):
    x = draws(100_000)
    x[where] = np.nan
    with pytest.raises(ModelError) as err:
        life_summary(da.from_array(x, chunks=10_000))
    assert err.value.field == "samples"
    assert "1 are NaN or infinite" in err.value.reason
