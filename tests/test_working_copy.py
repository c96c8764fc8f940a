"""Working copies (Sampler.working_copy, Block.working_copy): what every chunk task of
engine.generate draws from.

A working copy must draw exactly what a copy rebuilt from the sampler's saved file draws
(the copy generate used before, through ``storage.dumps``/``loads``), whatever the original
drew before, and keep its own counters, so tasks running side by side never mix their costs.
The reference here is that rebuilt copy; equality is exact because both run the same code on
the same uniforms.
"""
import pickle
import threading

import numpy as np
import pytest

import lifedraw
from lifedraw import engine
from lifedraw.engine.scenarios import load_scenario
from lifedraw.engine.systems import system_from_scenario
from lifedraw.engine.storage import dumps, loads

N = 40_000

SAMPLERS = {
    "numerical inversion of a formula": lambda: engine.fit(lifedraw.density_formula(
        "t**(k - 1)*exp(-(t/s)**p)", (0, float("inf")), dict(k=2.5, p=1.6, s=1.0)), "inversion"),
    "rejection with draws beyond the hat": lambda: engine.fit(load_scenario("sensor-bathtub").target(), "rejection"),
    "ratio-of-uniforms": lambda: engine.fit(lifedraw.family("gamma", shape=2.5, scale=3.0), "ratio-of-uniforms"),
    "Leva's normal": lambda: engine.fit(lifedraw.family("normal", mean=10.0, sd=2.0), "ratio-of-uniforms"),
    "table of binned field data": lambda: engine.fit(load_scenario("ebike-battery-returns").target(), "table"),
    "composition of a mixture": lambda: engine.fit(lifedraw.mixture(
        [lifedraw.family("weibull", shape=0.6, scale=50.0), lifedraw.family("weibull", shape=4.0, scale=500.0)],
        [0.3, 0.7]), "composition"),
}


@pytest.mark.parametrize("build", SAMPLERS.values(), ids=SAMPLERS.keys())
def test_a_working_copy_draws_what_a_copy_from_the_saved_file_draws(build):
    original = build()
    original.sample(5_000, 1)                           # the original has drawn before
    counts_before = dict(original.counts)
    rebuilt = loads(dumps(original))
    copy = original.working_copy()
    np.testing.assert_array_equal(copy.sample(N, 9), rebuilt.sample(N, 9))
    assert copy.counts == rebuilt.counts
    assert original.counts == counts_before             # the copy's costs are its own
    assert copy.stats["method"] == original.stats["method"]


def test_working_copies_in_two_threads_draw_what_each_draws_alone():
    # Composition keeps sub-samplers with counters of their own: each copy needs its own parts.
    original = SAMPLERS["composition of a mixture"]()
    results, counts = {}, {}

    def work(k):
        copy = original.working_copy()
        results[k] = [copy.sample(20_000, np.random.default_rng([k, r])) for r in range(20)]
        counts[k] = (dict(copy.counts), [dict(p.counts) for p in copy.parts])
    threads = [threading.Thread(target=work, args=(k,)) for k in range(2)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    alone = loads(dumps(original))
    expected = [alone.sample(20_000, np.random.default_rng([1, r])) for r in range(20)]
    for got, want in zip(results[1], expected):
        np.testing.assert_array_equal(got, want)
    assert counts[1] == (alone.counts, [p.counts for p in alone.parts])
    assert all(p.counts["samples"] == 0 for p in original.parts)


def test_a_system_working_copy_draws_what_an_unpickled_copy_draws():
    # The pumping station has series, parallel and cold-standby blocks.
    system = system_from_scenario(load_scenario("pumping-station-system"))
    system.sample(2_000, 3)
    copy = system.working_copy()
    np.testing.assert_array_equal(copy.sample(N, 4), pickle.loads(pickle.dumps(system)).sample(N, 4))
