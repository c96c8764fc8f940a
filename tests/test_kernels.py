"""The compiled kernels (engine/kernels.py) agree with their pure-numpy twins.

The numpy path is what users without Numba run, so both must give the same
numbers for the same input: exactly for Leva's candidate loop (same uniforms, same
arithmetic, same order), and to rounding for the inverse-CDF polynomial (the compiled
loop may fuse a multiply and an add into one rounding) and for rejection (numba's
log1p may differ from numpy's in the last bit).
"""
import math

import numpy as np
import pytest

import lifedraw
from lifedraw import engine
from lifedraw.engine import Target, kernels

pytestmark = pytest.mark.skipif(not kernels.HAVE_JIT, reason="Numba not installed: only the numpy path exists")


def test_inverse_cdf_kernel_matches_numpy_twin():
    s = engine.fit(lifedraw.density_formula("t**(k - 1)*exp(-(t/s)**p)", (0, math.inf), dict(k=2.5, p=1.6, s=1.0)))
    u = np.random.default_rng(1).random(200_000)
    u[:3] = [0.0, 1.0 - 2**-53, s.u_start[5]]          # ends and an exact piece boundary
    tables = (s.guide, s.u_start, kernels.pack_pinv_table(s.x0, s.width, s.coef, s.du))
    jit = kernels.pinv_eval(u, *tables)
    twin = kernels.pinv_eval(u, *tables, use_jit=False)
    np.testing.assert_allclose(jit, twin, rtol=1e-15, atol=0)


def test_leva_compiled_loop_gives_the_same_deviates_and_counts(monkeypatch):
    target = lifedraw.family("normal", mean=0.0, sd=1.0)
    compiled = engine.fit(target, "ratio-of-uniforms")
    a = compiled.sample(100_000, 7)
    monkeypatch.setattr(kernels, "HAVE_JIT", False)
    plain = engine.fit(target, "ratio-of-uniforms")
    b = plain.sample(100_000, 7)
    np.testing.assert_array_equal(a, b)
    for key in ("uniforms", "candidates", "accepted", "squeezed", "log_evals"):
        assert compiled.counts[key] == plain.counts[key], key


@pytest.mark.parametrize("target", [
    lifedraw.density_formula("t**(k - 1)*exp(-(t/s)**p)", (0, math.inf), dict(k=2.5, p=1.6, s=1.0)),
    lifedraw.family("weibull", shape=3.5, scale=100.0, location=20.0),
], ids=["generalised gamma formula", "Weibull with a location"])
def test_ratio_of_uniforms_compiled_pass_gives_the_same_draws_and_counts(target, monkeypatch):
    sampler = engine.fit(target, "ratio-of-uniforms")
    assert sampler.envelope == "polygon"          # the envelope the compiled pass serves
    a = sampler.sample(100_000, 11)
    counts = dict(sampler.counts)
    monkeypatch.setattr(kernels, "HAVE_JIT", False)
    sampler.reset_counters()
    b = sampler.sample(100_000, 11)
    # Same uniforms, same arithmetic in the same order, no fused multiply-adds: equal bit for bit.
    np.testing.assert_array_equal(a, b)
    assert sampler.counts == counts


@pytest.mark.parametrize("target", [
    lifedraw.family("gamma", shape=2.5, scale=1.0),
    lifedraw.mixture([lifedraw.family("weibull", shape=0.6, scale=50.0), lifedraw.family("weibull", shape=4.0, scale=500.0)],
                   [0.3, 0.7]),
], ids=["gamma 2.5", "mixture with a pole"])
def test_rejection_compiled_pass_gives_the_same_draws_and_counts(target, monkeypatch):
    compiled = engine.fit(target, "rejection")
    a = compiled.sample(50_000, 3)
    monkeypatch.setattr(kernels, "HAVE_JIT", False)
    b = compiled.sample(50_000, 3)
    # Same uniforms, same verdicts; positions agree to rounding (numba's log1p may
    # differ from numpy's in the last bit).
    np.testing.assert_allclose(a, b, rtol=1e-12, atol=0)


@pytest.mark.parametrize("limit", [None, 0.7, "per socket"])
@pytest.mark.parametrize("runs", [1, 3])
def test_renewal_round_kernel_matches_its_numpy_twin(limit, runs):
    # Same counts per (run, period) and the same sockets kept, in the same order, by both paths.
    rng = np.random.default_rng(5)
    n, periods = 30_000, 7
    clock = rng.random(n) * 1.5
    life = rng.exponential(0.5, n)
    life[:4] = [0.0, 2.0, 0.7, 1e-300]                 # a zero life, one past the horizon, one at the cut
    cut = rng.random(n) + 0.2 if limit == "per socket" else limit
    run = np.repeat(np.arange(runs, dtype=np.int64) * periods, n // runs) if runs > 1 else None
    out = []
    for use_jit in (True, False):
        c, r = clock.copy(), None if run is None else run.copy()
        repl, fail = np.zeros(runs * periods, np.int64), np.zeros(runs * periods, np.int64)
        k = kernels.renewal_step(c, life, cut, r, 2.0, 2.0 / periods, periods, repl, fail, use_jit=use_jit)
        out.append((k, c[:k], None if r is None else r[:k], repl, fail))
    (k1, c1, r1, p1, f1), (k2, c2, r2, p2, f2) = out
    assert k1 == k2 and 0 < k1 < n
    np.testing.assert_array_equal(c1, c2)
    np.testing.assert_array_equal(p1, p2)
    np.testing.assert_array_equal(f1, f2)
    if r1 is not None:
        np.testing.assert_array_equal(r1, r2)


def test_window_pass_kernel_matches_its_numpy_twin():
    # Same counts and the same kept values in the same order by both paths; the sum of squares
    # to rounding (four partial sums against numpy's dot). Ties on both window edges, values
    # below, between and above the windows, an open-ended window, and non-finite draws.
    rng = np.random.default_rng(11)
    x = rng.weibull(1.5, 300_001) * 100.0
    x[:6] = [10.0, 20.0, 50.0, 80.0, np.nan, np.inf]       # window edges exactly, then bad draws
    times = np.array([5.0, 50.0, 500.0])
    lo, hi = np.array([10.0, 50.0, 120.0]), np.array([20.0, 80.0, np.inf])
    for room in (10**6, 1_000):                              # room for all, and too little room
        jit = kernels.window_pass(x, 90.0, times, lo, hi, room)
        twin = kernels.window_pass(x, 90.0, times, lo, hi, room, use_jit=False)
        assert jit[1] == twin[1]
        for a, b in zip(jit[2:5], twin[2:5]):
            np.testing.assert_array_equal(a, b)
        np.testing.assert_array_equal(jit[5], twin[5])
        assert jit[6] == twin[6]
    # ... and both against numpy's plain counts (NaN compares false; inf is a draw like others
    # here, since a sample with a bad draw is refused whatever else it adds).
    assert jit[1] == 2
    np.testing.assert_array_equal(jit[2], [np.count_nonzero(x > t) for t in times])
    np.testing.assert_array_equal(jit[3], [np.count_nonzero(x < v) for v in lo])
    np.testing.assert_array_equal(jit[4], [np.count_nonzero((x >= a) & (x <= b)) for a, b in zip(lo, hi)])
    assert jit[6] == sum(jit[4]) and jit[5].size == 1_000
    finite = x[np.isfinite(x)]
    d = finite - 90.0
    clean = kernels.window_pass(finite, 90.0, times, lo, hi, 0)
    assert clean[0] == pytest.approx(float(np.dot(d, d)), rel=1e-12)
    assert kernels.window_pass(finite, 90.0, times, lo, hi, 0, use_jit=False)[0] == pytest.approx(clean[0], rel=1e-12)
