"""Specification of the Gauss-Jacobi rule that integrates a cumulative integral's first piece at a
fractional-power start (engine.numeric.gauss_jacobi, Golub & Welsch 1969).

References: scipy.special.roots_jacobi (the rule the engine used before), and the exact moments of the
weight, summed in fractions.
"""
from fractions import Fraction
from math import comb

import numpy as np
import pytest
from scipy import special

from lifedraw.engine.numeric import gauss_jacobi


@pytest.mark.parametrize("alpha", [0.013, 0.3, 1.5, 2.7, 7.25, 25.5])
def test_the_nodes_and_weights_are_scipy_s(alpha):
    # scipy.special.roots_jacobi(12, 0, alpha): nodes to 4 ulps of 1; weights to 1e-13 relative where
    # they carry the rule (above 1e-6 of the largest: scipy's own weights carry up to about 7e-14 of
    # rounding, measured against the exact moments below; the tiny weights next to x = -1 of a large
    # alpha differ by up to 5e-11 relative and weigh nothing in a sum).
    x, w = gauss_jacobi(12, alpha)
    x_ref, w_ref = special.roots_jacobi(12, 0.0, alpha)
    np.testing.assert_allclose(x, x_ref, rtol=0, atol=4 * np.finfo(float).eps)
    big = w_ref > 1e-6 * w_ref.max()
    np.testing.assert_allclose(w[big], w_ref[big], rtol=1e-13, atol=0)


@pytest.mark.parametrize("alpha", ["3/10", "3/2", "29/4", "51/2"])
def test_the_rule_integrates_polynomials_up_to_degree_23_exactly(alpha):
    # integral over [-1, 1] of (1 + x)^alpha x^k, written with s = (1 + x)/2 as
    # 2^(alpha + 1) sum_j C(k, j) 2^j (-1)^(k - j) / (alpha + j + 1), summed in exact fractions; a
    # 12-point Gauss rule is exact to degree 23 (Szego 1975, 3.4), so only rounding is left: 1e-14
    # (measured: at most 2.3e-15; scipy's rule: up to 3.9e-14).
    a = Fraction(alpha)
    x, w = gauss_jacobi(12, float(a))
    for k in (0, 1, 5, 11, 17, 23):
        exact = float(sum(Fraction(comb(k, j)) * 2**j * (-1) ** (k - j) / (a + j + 1) for j in range(k + 1))) \
            * 2.0 ** (float(a) + 1.0)
        assert abs(np.dot(w, x**k) - exact) <= 1e-14 * abs(exact), (k, np.dot(w, x**k), exact)
