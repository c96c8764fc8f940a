"""The set-up's compiled kernels (engine/kernels.py) agree with their pure-numpy twins, bit for bit:
the Chebyshev sums of the piecewise integral (engine/piece_series.py) and the interpolating
polynomials of the inverse-CDF pieces (engine/methods/inversion.py). Same arithmetic, same order.
"""
import numpy as np
import pytest

from lifedraw.engine import kernels
from lifedraw.engine.methods.inversion import NODES_S

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
