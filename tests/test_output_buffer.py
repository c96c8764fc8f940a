"""``sample(n, rng, out=buffer)`` follows numpy's ``out=`` convention on every method: the draws land in
the caller's memory, are the same numbers as without ``out``, and a wrong buffer gets a clear error.

Reference for the convention: numpy.random.Generator.random(size, dtype, out) (same dtype/shape rules).
"""
import numpy as np
import pytest

import lifedraw
from lifedraw import ModelError

MODELS = {
    "inversion": lambda: lifedraw.family("weibull", shape=2.6, scale=31000.0),
    "rejection": lambda: lifedraw.density_formula("t**1.5*exp(-t)"),
    "ratio-of-uniforms": lambda: lifedraw.density_formula("t**1.5*exp(-t)"),
    "table": lambda: lifedraw.binned_counts([0.0, 1.0, 2.0, 4.0], [5, 3, 2]),
    "composition": lambda: lifedraw.mixture([lifedraw.family("exponential", scale=10.0),
                                             lifedraw.family("weibull", shape=3.0, scale=50.0)], [0.3, 0.7]),
}


@pytest.mark.parametrize("method", sorted(MODELS))
def test_draws_into_the_buffer_are_the_draws_without_it(method):
    sampler = lifedraw.fit(MODELS[method](), method=method)
    expected = sampler.sample(70_000, rng=5)      # more than one internal chunk
    buffer = np.full(70_000, np.nan)
    returned = sampler.sample(rng=5, out=buffer)
    assert returned is buffer or np.shares_memory(returned, buffer)
    np.testing.assert_array_equal(buffer, expected)


def test_n_and_the_buffer_must_agree():
    sampler = lifedraw.fit(lifedraw.family("exponential", scale=1.0))
    sampler.sample(10, rng=1, out=np.empty(10))
    with pytest.raises(ModelError, match="out"):
        sampler.sample(11, rng=1, out=np.empty(10))


@pytest.mark.parametrize("buffer, reason", [
    (np.empty(10, dtype=np.float32), "float64"),
    (np.empty(20)[::2], "contiguous"),
    ([0.0] * 10, "numpy array"),
], ids=["float32", "strided", "list"])
def test_a_wrong_buffer_is_refused_by_name(buffer, reason):
    sampler = lifedraw.fit(lifedraw.family("exponential", scale=1.0))
    with pytest.raises(ModelError, match=reason) as err:
        sampler.sample(rng=1, out=buffer)
    assert err.value.field == "out"


def test_a_read_only_buffer_is_refused():
    buffer = np.empty(10)
    buffer.flags.writeable = False
    with pytest.raises(ModelError, match="read-only"):
        lifedraw.fit(lifedraw.family("exponential", scale=1.0)).sample(rng=1, out=buffer)
