"""Specification of the Chebyshev series that evaluate a cumulative integral (engine/piece_series.py).

References: closed-form integrals (exp, a power with a fractional exponent), scipy.stats laws for the
formula models whose F and R now come from the series (generalised gamma, lognormal), and the
adaptive Gauss-Legendre quadrature that the series stands in for (engine.numeric.CumulativeIntegral).
"""
import math

import numpy as np
import pytest
from scipy import special, stats

import lifedraw
from lifedraw.engine.numeric import CumulativeIntegral, SupportMap
from lifedraw.engine.piece_series import PieceSeries


def _series_of(integrand, edges, first_end=False):
    """A series on a partition whose piece masses are the closed form G(b) - G(a) (given by the caller)."""
    a, b = edges[:-1], edges[1:]
    return PieceSeries.build(edges, integrand.mass(a, b), np.concatenate([[0.0], np.cumsum(integrand.mass(a, b))[:-1]]),
                             np.concatenate([np.cumsum(integrand.mass(a, b)[::-1])[::-1][1:], [0.0]]),
                             integrand, integrand.mass, first_end=first_end)


class Exp:
    """g(y) = exp(3y): G from a to b is exp(3a) expm1(3(b - a))/3 (no cancellation on short pieces)."""

    def __call__(self, y):
        return np.exp(3.0 * y)

    @staticmethod
    def mass(a, b):
        return np.exp(3.0 * a) * np.expm1(3.0 * (b - a)) / 3.0


class Root:
    """g(y) = sqrt(y) on [0, 1]: a fractional power at the start (G = 2/3 y^1.5; the difference
    b^1.5 - a^1.5 written as (b - a)(a + sqrt(ab) + b)/(sqrt(a) + sqrt(b)), without cancellation)."""

    def __call__(self, y):
        return np.sqrt(np.maximum(y, 0.0))

    @staticmethod
    def mass(a, b):
        ra, rb = np.sqrt(a), np.sqrt(b)
        with np.errstate(invalid="ignore"):
            mass = 2.0 / 3.0 * (b - a) * (a + ra * rb + b) / (ra + rb)
        return np.where(rb > 0, mass, 0.0)


def test_the_series_of_a_smooth_integrand_gives_its_integral_to_rounding():
    edges = np.linspace(-1.0, 1.0, 9)
    series = _series_of(Exp(), edges)
    assert series.resolved.all()
    y = np.random.default_rng(1).uniform(-1, 1, 5000)
    below, trusted_below = series.sums(y, upper=False)
    above, trusted_above = series.sums(y, upper=True)
    # Closed forms; 1e-14 relative is what a trusted value promises (piece_series.RELATIVE).
    np.testing.assert_allclose(below[trusted_below], Exp.mass(-1.0, y)[trusted_below], rtol=1e-14, atol=0)
    np.testing.assert_allclose(above[trusted_above], Exp.mass(y, 1.0)[trusted_above], rtol=1e-14, atol=0)
    assert trusted_below.mean() > 0.95 and trusted_above.mean() > 0.95


def test_a_fractional_power_at_the_start_is_not_resolved_on_one_piece_but_is_after_the_geometric_split():
    edges = np.linspace(0.0, 1.0, 5)
    one_try = PieceSeries(edges, Root()(PieceSeries.nodes(edges[:-1], edges[1:])), Root.mass(edges[:-1], edges[1:]),
                          np.zeros(4), np.zeros(4))
    assert not one_try.resolved[0]                      # sqrt is not a polynomial next to 0
    series = _series_of(Root(), edges, first_end=True)
    y = np.concatenate([np.logspace(-10, -1, 200), np.linspace(0.1, 1.0, 200)])
    value, trusted = series.sums(y, upper=False)
    assert trusted[y > 1e-9].all()
    np.testing.assert_allclose(value[trusted], Root.mass(0.0, y[trusted]), rtol=1e-14, atol=0)


def test_an_untrusted_value_is_flagged_and_the_end_piece_cut_so_that_it_becomes_trusted():
    # Just below the end of the last piece the mass above y is tiny beside the piece's own mass:
    # a sum of terms of the piece's size cannot give it to 1e-14, so that value is not trusted;
    # build() cuts that piece geometrically towards its end, after which the value is trusted and right.
    edges = np.linspace(-1.0, 1.0, 3)
    a, b = edges[:-1], edges[1:]
    masses = Exp.mass(a, b)
    plain = PieceSeries(edges, Exp()(PieceSeries.nodes(a, b)), masses, np.array([0.0, masses[0]]),
                        np.array([masses[1], 0.0]))
    y = np.array([1.0 - 1e-9])
    _, trusted = plain.sums(y, upper=True)
    assert not trusted[0]
    value, trusted = _series_of(Exp(), edges).sums(y, upper=True)
    assert trusted[0]
    np.testing.assert_allclose(value, Exp.mass(y, 1.0), rtol=1e-14, atol=0)


def test_cumulative_integral_matches_the_incomplete_gamma_function_below_and_above():
    # integral_0^t s^1.5 exp(-s^1.6) ds = Gamma(a)/1.6 * P(a, t^1.6) with a = 2.5/1.6 (substitute
    # u = s^1.6; DLMF 8.2.4); the upper integral with Q(a, t^1.6). 1e-13 relative: the partition is
    # built to 1e-13 (CumulativeIntegral's default rtol), and the series must not lose that.
    a = 2.5 / 1.6
    g = lambda t: t**1.5 * np.exp(-t**1.6)                                      # noqa: E731
    integral = CumulativeIntegral(g, SupportMap(0.0, math.inf, 0.0, 1.0))
    t = np.logspace(-6, 1.2, 3000)
    scale = special.gamma(a) / 1.6
    np.testing.assert_allclose(integral(t), scale * special.gammainc(a, t**1.6), rtol=1e-13, atol=0)
    # Above: where the mass above t is at least 1e-10 (deeper, the partition itself stops refining at
    # 1e-17 of the total, so the quadrature and the series share a floor that is not the series').
    upper = scale * special.gammaincc(a, t**1.6)
    bulk = upper > 1e-10
    np.testing.assert_allclose(integral.upper(t[bulk]), upper[bulk], rtol=1e-13, atol=0)


@pytest.mark.parametrize("k, p", [(2.5, 1.6), (0.6, 2.0)], ids=["k=2.5", "k=0.6 (pole at 0)"])
def test_generalised_gamma_formula_cdf_and_sf_match_scipy(k, p):
    # f ~ t^(k-1) exp(-t^p) is scipy's gengamma(a=k/p, c=p); 1e-12 relative down to 1e-12 of mass.
    target = lifedraw.density_formula("t**(k - 1)*exp(-t**p)", (0, math.inf), dict(k=k, p=p))
    ref = stats.gengamma(a=k / p, c=p)
    t = ref.ppf(np.concatenate([np.logspace(-12, -1, 12), np.linspace(0.1, 0.9, 9)]))
    np.testing.assert_allclose(target.cdf(t), ref.cdf(t), rtol=1e-12, atol=0)
    s = ref.isf(np.concatenate([np.logspace(-12, -1, 12), np.linspace(0.1, 0.9, 9)]))
    np.testing.assert_allclose(target.sf(s), ref.sf(s), rtol=1e-12, atol=0)


class Decay:
    """g(y) = exp(-100 y): a tail that falls by e^-100 over [0, 1]; G from a to b is
    exp(-100 a)(1 - exp(-100 (b - a)))/100, written with expm1 (no cancellation on short pieces)."""

    def __call__(self, y):
        return np.exp(-100.0 * y)

    @staticmethod
    def mass(a, b):
        return np.exp(-100.0 * a) * -np.expm1(-100.0 * (b - a)) / 100.0


def test_a_tail_piece_is_cut_only_as_deep_as_its_mass_beyond_needs_and_stays_trusted_to_its_end():
    # Each piece of a falling tail holds about e^8.3 times the mass beyond it: a cut of
    # log2(that / 25) + 2 halvings (10, not 40) leaves the mass above every point at least 1/25 of its
    # part's (the rounding of the part's terms, 4e-16, against RELATIVE = 1e-14), so every value near
    # each piece's end is trusted and right to 2e-14 (closed form; the trust test's 1e-14 is an estimate
    # of rounding, and this tail measures 1.3e-14 with the full 40-deep cut as well). A single halving
    # leaves them untrusted.
    edges = np.linspace(0.0, 1.0, 13)
    series = _series_of(Decay(), edges)
    w = edges[1] - edges[0]
    y = (edges[2:12, None] - w * np.logspace(-1, -11, 21)[None, :]).ravel()      # pieces 1 to 10
    value, trusted = series.sums(y, upper=True)
    assert trusted.all()
    np.testing.assert_allclose(value, Decay.mass(y, 1.0), rtol=2e-14, atol=0)
    inner = series.edges[(series.edges > edges[1]) & (series.edges < edges[11])]
    assert inner.size <= 10 * 11                     # pieces 1 to 10, each cut 10 deep, not 40


def test_survival_next_to_a_fractional_power_start_is_one_minus_a_tiny_mass():
    # f ~ t^1.5 exp(-t^1.6) at t -> 0 (scipy's gengamma(a=2.5/1.6, c=1.6)): R(t) = 1 - F(t) with F below
    # 1e-15, so R must be 1 to rounding (4 ulps). A Gauss-Legendre rule from t up to the end of the first
    # piece misses t^1.5's digits there (R was 1 - 1e-11 at t = 1e-18); the piece's Gauss-Jacobi mass
    # less the part below t keeps them.
    target = lifedraw.density_formula("t**(k - 1)*exp(-t**p)", (0, math.inf), dict(k=2.5, p=1.6))
    t = np.array([1e-18, 1e-15, 1e-12, 1e-9, 1e-7])
    ref = stats.gengamma(a=2.5 / 1.6, c=1.6)
    np.testing.assert_allclose(target.sf(t), ref.sf(t), rtol=0, atol=4 * np.finfo(float).eps)
