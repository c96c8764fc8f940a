"""The set-up's compiled kernels (engine/kernels.py) agree with their pure-numpy twins, bit for bit:
the Chebyshev sums of the piecewise integral (engine/piece_series.py), the interpolating
polynomials of the inverse-CDF pieces and one fitting round of them (engine/methods/inversion.py).
Same arithmetic, same order.
"""
import numpy as np
import pytest

from lifedraw.engine import kernels
from lifedraw.engine.methods.inversion import NODES_S, TEST_S

pytestmark = pytest.mark.skipif(not kernels.HAVE_JIT, reason="Numba not installed: only the numpy path exists")


def test_the_series_kernel_matches_its_numpy_twin():
    rng = np.random.default_rng(3)
    m = 50
    edges = np.sort(rng.uniform(0, 1, m + 1))
    edges[7] = edges[6]                                    # a piece of zero width
    table = rng.normal(size=(m, 2, 25))
    base = rng.uniform(0, 1, m)
    limit = np.where(rng.random(m) < 0.2, np.inf, rng.uniform(0, 1, m))
    y = np.concatenate([rng.uniform(-0.1, 1.1, 10_001), edges])   # outside points clamp to the end pieces
    for which in (0, 1):
        jit = kernels.chebyshev_piece_sums(y, edges, table, which, base, limit)
        twin = kernels.chebyshev_piece_sums(y, edges, table, which, base, limit, use_jit=False)
        np.testing.assert_array_equal(jit[0], twin[0])
        np.testing.assert_array_equal(jit[1], twin[1])


def test_the_series_kernel_reads_each_point_on_its_own_side():
    rng = np.random.default_rng(5)
    m = 40
    edges = np.sort(rng.uniform(0, 1, m + 1))
    table = rng.normal(size=(m, 2, 25))
    before, after = rng.uniform(0, 1, m), rng.uniform(0, 1, m)
    limit = np.where(rng.random(m) < 0.2, np.inf, rng.uniform(0, 1, m))
    y = rng.uniform(-0.1, 1.1, 5_003)                      # not a multiple of four: the kernel's rest loop too
    side = rng.random(y.size) < 0.4
    for use_jit in (True, False):
        mixed = kernels.chebyshev_piece_sums(y, edges, table, side, np.stack([before, after]), limit,
                                             use_jit=use_jit)
        below = kernels.chebyshev_piece_sums(y, edges, table, 0, before, limit, use_jit=use_jit)
        above = kernels.chebyshev_piece_sums(y, edges, table, 1, after, limit, use_jit=use_jit)
        # One side per point gives exactly what each side gives alone (same sums, same order).
        np.testing.assert_array_equal(mixed[0], np.where(side, above[0], below[0]))
        np.testing.assert_array_equal(mixed[1], np.where(side, above[1], below[1]))


def test_the_piece_fitting_kernel_matches_its_numpy_twin_and_interpolates():
    rng = np.random.default_rng(4)
    s = np.sort(rng.random((2000, NODES_S.size)), axis=1)
    s[:, 0], s[:, -1] = 0.0, 1.0
    jit = kernels.interpolating_coefficients(s, NODES_S)
    np.testing.assert_array_equal(jit, kernels.interpolating_coefficients(s, NODES_S, use_jit=False))
    # The polynomial passes through its nodes (numpy.polynomial's evaluation as the outside check);
    # rows of random nodes can be ill-conditioned, so the well-separated ones are held to 1e-12.
    spread = np.min(np.diff(s, axis=1), axis=1) > 0.05
    values = np.stack([np.polynomial.polynomial.polyval(s[i], jit[i]) for i in np.flatnonzero(spread)])
    np.testing.assert_allclose(values, np.broadcast_to(NODES_S, values.shape), rtol=0, atol=1e-12)


def test_the_fitting_round_kernels_match_their_numpy_twins_and_classify_the_pieces():
    rng = np.random.default_rng(6)
    n = 3000
    x0 = rng.uniform(0, 10, n)
    w = rng.uniform(1e-3, 1.0, n)
    # Increments of smooth increasing laws at the nodes (a power u = s**p per row), with a few rows
    # broken: a negligible piece, nodes that do not rise, and a NaN.
    p = rng.uniform(0.5, 2.0, n)
    du = 1e-3 * NODES_S[None, :] ** p[:, None]
    du[0] *= 1e-12                                         # negligible: linear
    du[1, 3] = du[1, 2]                                    # not increasing
    du[2, 4] = np.nan
    jit = kernels.inverse_pieces(x0, w, du, NODES_S, TEST_S, 5e-11)
    twin = kernels.inverse_pieces(x0, w, du, NODES_S, TEST_S, 5e-11, use_jit=False)
    for a, b in zip(jit, twin):
        np.testing.assert_array_equal(a, b)
    coef, x_test, status = jit
    assert status[0] == kernels.LINEAR and status[1] == kernels.NODES_NOT_INCREASING
    assert status[2] == kernels.NODES_NOT_INCREASING
    # FITTED rows rise from x0 through the test ages to x0 + w; NOT_MONOTONE rows turn back somewhere
    # (x = s**(1/p) with p > 1 is steep at s = 0, where a polynomial overshoots).
    ends = np.diff(np.concatenate([x0[:, None], x_test, (x0 + w)[:, None]], axis=1), axis=1)
    assert np.all(ends[status == kernels.FITTED] >= 0)
    turned = status == kernels.NOT_MONOTONE
    assert turned.any() and np.all(np.any(ends[turned] < 0, axis=1))
    assert np.sum(status == kernels.FITTED) > 0.5 * n
    # The test ages are the polynomial's values (numpy.polynomial's evaluation as the outside check).
    fitted = np.flatnonzero(status == kernels.FITTED)[:50]
    for i in fitted:
        np.testing.assert_allclose(x_test[i], x0[i] + w[i] * np.polynomial.polynomial.polyval(TEST_S, coef[i]),
                                   rtol=1e-13, atol=0)
    # Errors: rows of each status, and a NaN among the test increments.
    du_test = 1e-3 * TEST_S[None, :] ** p[:, None] + rng.normal(scale=1e-12, size=(n, TEST_S.size))
    du_test[5, 7] = np.nan
    total = du[:, -1]
    e_jit = kernels.inverse_piece_errors(du_test, total, TEST_S, status)
    e_twin = kernels.inverse_piece_errors(du_test, total, TEST_S, status, use_jit=False)
    np.testing.assert_array_equal(e_jit, e_twin)
    assert e_jit[0] == total[0] and np.isinf(e_jit[1]) and np.isnan(e_jit[5]) == (status[5] == kernels.FITTED)
    ok = status == kernels.FITTED
    ok[5] = False
    expected = np.max(np.abs(du_test - total[:, None] * TEST_S[None, :]), axis=1)
    np.testing.assert_array_equal(e_jit[ok], expected[ok])


def test_the_guide_table_kernel_matches_its_numpy_twin_and_its_definition():
    # Starts as numerical inversion makes them (cumulative sums of piece masses, some of zero mass,
    # a first start above 0 and a last one near 1), plus one start beyond 1 by rounding; bit for bit
    # against the twin (numpy's searchsorted) and, for every cell, against the definition read
    # directly: the last piece whose start is <= i/size, clamped into the pieces.
    rng = np.random.default_rng(8)
    for m in (1, 2, 7, 250):
        du = rng.exponential(size=m)
        du[rng.random(m) < 0.2] = 0.0
        u_start = 1e-12 + np.concatenate([[0.0], np.cumsum(du)[:-1]]) / max(du.sum(), 1.0)
        if m > 2:
            u_start[-1] = 1.0 + 1e-16
        size = 32 * m
        jit = kernels.guide_table(u_start, size)
        np.testing.assert_array_equal(jit, kernels.guide_table(u_start, size, use_jit=False))
        for i in range(size):
            at_or_below = np.flatnonzero(u_start <= i / size)
            expected = min(max(at_or_below[-1] if at_or_below.size else 0, 0), m - 1)
            assert jit[i] == expected


def test_the_series_kernel_finds_each_point_s_piece_when_neighbours_share_pieces():
    # The compiled loop tries the previous point's piece first; points in increasing runs (as the
    # inversion asks for them), on the edges themselves, on a zero-width piece, and outside the
    # partition on both sides must still land where numpy's search puts them (the twin), bit for bit.
    rng = np.random.default_rng(9)
    m = 30
    edges = np.sort(rng.uniform(0, 1, m + 1))
    edges[11] = edges[10]                                  # a piece of zero width
    table = rng.normal(size=(m, 2, 25))
    base = rng.uniform(0, 1, m)
    limit = rng.uniform(0, 1, m)
    runs = np.sort(rng.uniform(-0.05, 1.05, (200, 17)), axis=1).ravel()
    y = np.concatenate([runs, edges, edges[::-1], np.repeat(edges[-1], 3), [edges[0] - 1.0, np.nan]])
    for which in (0, 1):
        jit = kernels.chebyshev_piece_sums(y, edges, table, which, base, limit)
        twin = kernels.chebyshev_piece_sums(y, edges, table, which, base, limit, use_jit=False)
        np.testing.assert_array_equal(jit[0], twin[0])
        np.testing.assert_array_equal(jit[1], twin[1])
