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
