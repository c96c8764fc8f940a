"""Specification of the inversion method: closed-form and numerical F^-1, their u-error, draws,
persistence and sample sizes.

References: the u-error criterion of Derflinger, Hörmann & Leydold (2010), re-measured here
against outside cdf/sf (scipy.stats laws and closed forms; the smooth histogram, which has none,
against quadrature of its density); scipy.stats.kstest; scipy.stats.sampling.NumericalInversePolynomial
(UNU.RAN's PINV, the same published method) built from scipy's densities, not ours.
"""
import functools
import math
import warnings

import numpy as np
import pytest
from scipy import integrate, stats
from scipy.stats.sampling import NumericalInversePolynomial

import lifedraw
from lifedraw import engine
from lifedraw.engine import MethodNotApplicable, ModelError, Target, fit

FAMILY_CASES = [
    ("weibull", dict(shape=0.5, scale=100.0)),
    ("weibull", dict(shape=2.5, scale=1000.0, location=50.0)),
    ("exponential", dict(scale=200.0, location=10.0)),
    ("lognormal", dict(mu=3.0, sigma=0.8, location=5.0)),
    ("gamma", dict(shape=0.4, scale=30.0)),
    ("normal", dict(mean=100.0, sd=15.0)),
    ("loglogistic", dict(shape=4.0, scale=50.0)),
    ("smallest_extreme_value", dict(location=100.0, scale=10.0)),
    ("birnbaum_saunders", dict(shape=0.5, scale=1000.0)),
]

# Targets without a closed-form F^-1, so inversion is numerical.
NUMERICAL = {
    "gamma formula": lambda: lifedraw.density_formula("t**(k-1)*exp(-t/th)", (0.0, math.inf), dict(k=3.5, th=20.0)),
    "gamma formula with a pole": lambda: lifedraw.density_formula("t**(k-1)*exp(-t/th)", (0.0, math.inf),
                                                        dict(k=0.4, th=30.0)),
    "weibull 0.6 mixture (pole)": lambda: lifedraw.mixture(
        [lifedraw.family("weibull", shape=0.6, scale=50.0), lifedraw.family("weibull", shape=4.0, scale=500.0)],
        [0.3, 0.7]),
    "bimodal mixture": lambda: lifedraw.mixture(
        [lifedraw.family("lognormal", mu=3.0, sigma=0.25), lifedraw.family("weibull", shape=6.0, scale=300.0)],
        [0.4, 0.6]),
    "bathtub hazard": lambda: lifedraw.hazard_formula("a*b*t**(b-1) + c + d*exp(t/e1)", (0.0, math.inf),
                                            dict(a=1e-3, b=0.5, c=2e-3, d=1e-4, e1=50.0)),
    "residual life": lambda: lifedraw.density_formula("t**(k-1)*exp(-t/th)", (0.0, math.inf),
                                            dict(k=3.5, th=20.0)).given_survival(40.0),
    "smooth histogram": lambda: lifedraw.binned_counts([0.0, 100.0, 250.0, 400.0, 700.0, 1000.0],
                                                 [12, 3, 30, 45, 13], smooth=True),
    "finite support": lambda: lifedraw.density_formula("(t*(10-t))**2", (0.0, 10.0)),
}


def _scipy_mixture(weights, parts):
    return (lambda x: sum(w * p.cdf(x) for w, p in zip(weights, parts)),
            lambda x: sum(w * p.sf(x) for w, p in zip(weights, parts)))


def _bathtub_cdf_sf():
    # h = a b t^(b-1) + c + d e^(t/e1) integrates to H = a t^b + c t + d e1 (e^(t/e1) - 1); R = exp(-H)
    # (NIST/SEMATECH e-Handbook 8.1.2.4).
    a, b, c, d, e1 = 1e-3, 0.5, 2e-3, 1e-4, 50.0

    def H(t):
        t = np.maximum(t, 0.0)
        return a * t**b + c * t + d * e1 * np.expm1(t / e1)
    return (lambda t: -np.expm1(-H(t))), (lambda t: np.exp(-H(t)))


def _residual_gamma_cdf_sf():
    # Remaining life after surviving to 40: R(x) = R(40 + x)/R(40) (e-Handbook 8.1.2.4), scipy's gamma.
    g = stats.gamma(3.5, scale=20.0)
    return (lambda x: (g.sf(40.0) - g.sf(40.0 + x)) / g.sf(40.0)), (lambda x: g.sf(40.0 + x) / g.sf(40.0))


def _smooth_histogram_cdf_sf():
    # No outside reference exists: the smooth histogram is lifedraw's own construction (a monotone
    # cubic CDF through the cumulative shares). Its cdf is re-derived here by an independent
    # computation, scipy.integrate.quad of its density, in test_smooth_histogram_cdf_is_the_integral_
    # of_its_density below; the u-error tests then use the model's cdf/sf.
    t = NUMERICAL["smooth histogram"]()
    return t.cdf, t.sf


#: The outside reference (cdf, sf) of each numerical case: scipy.stats laws and closed forms.
REFERENCES = {
    "gamma formula": lambda: (stats.gamma(3.5, scale=20.0).cdf, stats.gamma(3.5, scale=20.0).sf),
    "gamma formula with a pole": lambda: (stats.gamma(0.4, scale=30.0).cdf, stats.gamma(0.4, scale=30.0).sf),
    "weibull 0.6 mixture (pole)": lambda: _scipy_mixture(
        [0.3, 0.7], [stats.weibull_min(0.6, scale=50.0), stats.weibull_min(4.0, scale=500.0)]),
    "bimodal mixture": lambda: _scipy_mixture(
        [0.4, 0.6], [stats.lognorm(0.25, scale=math.exp(3.0)), stats.weibull_min(6.0, scale=300.0)]),
    "bathtub hazard": _bathtub_cdf_sf,
    "residual life": _residual_gamma_cdf_sf,
    "smooth histogram": _smooth_histogram_cdf_sf,
    # (t (10 - t))^2 on [0, 10] is t/10 ~ Beta(3, 3): scipy's beta(3, 3, scale=10).
    "finite support": lambda: (stats.beta(3, 3, scale=10.0).cdf, stats.beta(3, 3, scale=10.0).sf),
}


class Reference:
    def __init__(self, name):
        self.cdf, self.sf = REFERENCES[name]()


TOLERANCES = [1e-10, 1e-12, 1e-6]

@functools.lru_cache(maxsize=None)
def target(name):
    return NUMERICAL[name]()


@functools.lru_cache(maxsize=None)
def reference(name):
    return Reference(name)


@functools.lru_cache(maxsize=None)
def sampler(name, tolerance):
    return fit(target(name), "inversion", tolerance=tolerance)


def cases():
    return [pytest.param(name, tol, id=f"{name}-{tol:g}") for name in NUMERICAL for tol in TOLERANCES]


# 10^5 fixed u on a midpoint grid, plus both tails out to 1e-10 and 1 - 1e-10.
U_CHECK = np.sort(np.concatenate([(np.arange(100_000) + 0.5) / 100_000,
                                  np.logspace(-10, -2, 81), 1.0 - np.logspace(-10, -2, 81)]))


def measured_u_error(t, quantile, u=U_CHECK):
    """max |u - F(Q(u))|, from R = 1 - F above 1/2 (1 - u exact there), as DHL (2010) define it;
    ``t`` gives F and R (an outside reference for the numerical cases)."""
    x = quantile(u)
    return float(np.max(np.where(u > 0.5, np.abs((1.0 - u) - t.sf(x)), np.abs(u - t.cdf(x)))))


# ---- closed form -----------------------------------------------------------------------------

@pytest.mark.parametrize("name, params", FAMILY_CASES, ids=[f"{n}{p}" for n, p in FAMILY_CASES])
def test_closed_form_inversion_is_exact_to_rounding(name, params):
    t = lifedraw.family(name, **params)
    s = fit(t, "inversion")
    assert s.stats["variant"] == "closed form"
    # Rounding level (measured <= 2.5e-15); the issue asks for ~1e-12.
    assert s.stats["u_error"] <= 1e-14
    assert measured_u_error(t, s.quantile) <= 1e-14


def test_closed_form_draws_are_the_quantile_of_the_generators_uniforms():
    t = lifedraw.family("weibull", shape=1.7, scale=300.0)
    draws = fit(t, "inversion").sample(1000, 5)
    # X = F^-1(U) with U from numpy's Generator.random (Devroye 1986, II.2).
    assert draws.tolist() == t.quantile(np.random.default_rng(5).random(1000)).tolist()


# ---- numerical inversion: the u-error, reported and re-measured ------------------------------

@pytest.mark.parametrize("name, tol", cases())
def test_reported_u_error_is_within_the_tolerance(name, tol):
    s = sampler(name, tol)
    assert s.stats["variant"] == "piecewise polynomial"
    assert s.stats["u_error"] <= tol


def test_default_tolerance_is_1e_10_and_is_met():
    s = fit(target("bimodal mixture"), "inversion")
    assert s.tolerance == 1e-10
    assert measured_u_error(reference("bimodal mixture"), s.quantile) <= 1e-10


@pytest.mark.parametrize("name, tol", cases())
def test_independent_u_error_is_within_tolerance_and_not_above_the_report(name, tol):
    s = sampler(name, tol)
    measured = measured_u_error(reference(name), s.quantile)
    assert measured <= tol
    # The report is honest: an independent grid finds no larger error (10% slack for where
    # the grids sample the error curve).
    assert measured <= 1.1 * s.stats["u_error"]


@pytest.mark.parametrize("name, tol", cases())
def test_numerical_inverse_is_non_decreasing(name, tol):
    # F^-1 is monotone; DHL (2010, sec. 3) require the interpolant to keep that. The grid reaches
    # into the cut tails (mass below 0.05·tolerance).
    u = np.sort(np.concatenate([U_CHECK, np.logspace(-14, -10, 60), 1.0 - np.logspace(-10, -14, 60),
                                np.linspace(1 - 1e-10, 1 - 1e-12, 20_001)]))
    assert np.all(np.diff(sampler(name, tol).quantile(u)) >= 0.0)


@pytest.mark.parametrize("name", list(NUMERICAL))
def test_draws_pass_kolmogorov_smirnov_against_the_reference_cdf(name):
    # n = 2·10^5 detects a cdf error of ~0.005 (the 0.1% critical value is 1.95/sqrt(n) = 0.0044);
    # a fixed seed makes the verdict reproducible. Threshold: p > 0.001.
    draws = sampler(name, 1e-10).sample(200_000, 20261201)
    assert stats.kstest(draws, reference(name).cdf).pvalue > 1e-3


@pytest.mark.parametrize("name", list(NUMERICAL))
def test_numerical_draws_are_the_samplers_quantile_of_the_same_uniforms(name):
    # The u-error is proved for ``quantile``; sample() must be that function of the generator's
    # uniforms, bit for bit. 2e6 draws put uniforms beyond both 1e-6 quantiles into the stream
    # (asserted), so a draw path that cuts or treats the tails differently fails here
    # (tests/test_fault_injection.py measures it).
    s = sampler(name, 1e-10)
    u = np.random.default_rng(1).random(2_000_000)
    assert u.min() < 1e-6 and u.max() > 1 - 1e-6
    np.testing.assert_array_equal(s.sample(u.size, 1), s.quantile(u))


def test_smooth_histogram_cdf_is_the_integral_of_its_density():
    # No outside reference exists for the smooth histogram (our construction); an independent
    # computation: scipy.integrate.quad of its density from the lower edge, at 60 points.
    t = target("smooth histogram")
    x = np.linspace(0.5, 999.5, 60)
    edges = [0.0, 100.0, 250.0, 400.0, 700.0, 1000.0]
    want = [sum(integrate.quad(lambda s: float(t.pdf(s)), a, min(b, xi), epsabs=1e-15, epsrel=1e-13)[0]
                for a, b in zip(edges[:-1], edges[1:]) if a < xi) for xi in x]
    np.testing.assert_allclose(t.cdf(x), want, rtol=0, atol=1e-12)


def test_pole_draws_put_the_right_share_next_to_the_pole():
    # Gamma shape 0.4: F(t) ~ t^0.4 near 0, so a quarter of a percent of units fail before 1e-5·theta.
    # Binomial check with n = 10^6: the count is within 5 standard deviations of n·F(t).
    cut = 30.0 * 1e-5
    draws = sampler("gamma formula with a pole", 1e-10).sample(1_000_000, 7)
    p = stats.gamma(0.4, scale=30.0).cdf(cut)
    n = draws.size
    assert abs(np.sum(draws <= cut) - n * p) <= 5 * math.sqrt(n * p * (1 - p))


# ---- against an independent implementation of the same published method ----------------------

class _ScipyDensity:
    """An outside law (scipy.stats) in the scalar form UNU.RAN calls back: never our own pdf."""

    def __init__(self, parts, weights=(1.0,)):
        self.parts, self.weights = parts, weights

    def pdf(self, x):
        return float(sum(w * p.pdf(x) for w, p in zip(self.weights, self.parts)))

    def cdf(self, x):
        return float(sum(w * p.cdf(x) for w, p in zip(self.weights, self.parts)))


PINV_REFERENCES = {
    "gamma formula": lambda: _ScipyDensity([stats.gamma(3.5, scale=20.0)]),
    "gamma formula with a pole": lambda: _ScipyDensity([stats.gamma(0.4, scale=30.0)]),
    "bimodal mixture": lambda: _ScipyDensity([stats.lognorm(0.25, scale=math.exp(3.0)),
                                              stats.weibull_min(6.0, scale=300.0)], (0.4, 0.6)),
}


# The hazard model is left out only for time: UNU.RAN calls its pdf one point at a time (~3 s).
@pytest.mark.parametrize("name", ["gamma formula", "gamma formula with a pole", "bimodal mixture"])
def test_quantile_agrees_with_scipy_pinv_within_the_combined_u_errors(name):
    t = target(name)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        pinv = NumericalInversePolynomial(PINV_REFERENCES[name](), domain=t.support, u_resolution=1e-10,
                                          random_state=1)
    # Compared in u (|F(ours(u)) - F(theirs(u))| <= 1e-10 + 1e-10). Below u ~ 1e-7 next to a pole
    # PINV's own error exceeds its u_resolution (measured 3.6e-10 at u = 3.6e-10 for gamma 0.4),
    # so the far tails are covered by the independent u-error test instead.
    u = np.concatenate([np.linspace(1e-7, 1 - 1e-7, 20_001), np.logspace(-7, -2, 41), 1 - np.logspace(-7, -2, 41)])
    ours, theirs = sampler(name, 1e-10).quantile(u), pinv.ppf(u)
    ref = reference(name)
    gap = np.where(u > 0.5, np.abs(ref.sf(ours) - ref.sf(theirs)), np.abs(ref.cdf(ours) - ref.cdf(theirs)))
    assert np.max(gap) <= 2e-10


# ---- persistence ---------------------------------------------------------------------------------

@pytest.mark.parametrize("make", [
    lambda: target("weibull 0.6 mixture (pole)"),
    lambda: target("bathtub hazard"),
    lambda: lifedraw.family("lognormal", mu=3.0, sigma=0.8),
], ids=["numerical mixture", "numerical hazard", "closed form"])
def test_saved_and_loaded_sampler_gives_identical_draws_and_stats(make, tmp_path):
    s = fit(make(), "inversion", tolerance=1e-8)
    s.save(tmp_path / "s.lds")
    loaded = engine.load(tmp_path / "s.lds")
    assert type(loaded) is type(s)
    assert loaded.stats == s.stats
    assert loaded.sample(50_000, 99).tolist() == s.sample(50_000, 99).tolist()


# ---- sample sizes and randomness ------------------------------------------------------------

def test_zero_draws_give_an_empty_float_array():
    out = fit(lifedraw.family("exponential", scale=1.0), "inversion").sample(0, 1)
    assert out.shape == (0,) and out.dtype == np.float64


@pytest.mark.parametrize("n", [-1, 2.5, "many", float("nan"), True])
def test_invalid_sample_size_is_rejected(n):
    with pytest.raises(ModelError) as err:
        fit(lifedraw.family("exponential", scale=1.0), "inversion").sample(n, 1)
    assert err.value.field == "n"


def test_sample_size_beyond_memory_points_to_the_chunked_generator():
    with pytest.raises(ModelError) as err:
        fit(lifedraw.family("exponential", scale=1.0), "inversion").sample(1e15, 1)
    assert err.value.field == "n"
    assert "engine.generate" in err.value.reason


@pytest.mark.parametrize("name", ["gamma formula", None], ids=["numerical", "closed form"])
def test_seed_and_generator_give_the_same_draws(name):
    s = sampler(name, 1e-10) if name else fit(lifedraw.family("weibull", shape=2.0, scale=5.0), "inversion")
    # numpy's model: default_rng(seed) at the boundary, so an int seed and a Generator made from it agree.
    assert s.sample(1000, 123).tolist() == s.sample(1000, np.random.default_rng(123)).tolist()
    assert s.sample(1000, 123).tolist() == s.sample(1000, 123).tolist()
    assert s.sample(1000, 123).tolist() != s.sample(1000, 124).tolist()


def test_generator_state_advances_between_calls():
    s = fit(lifedraw.family("weibull", shape=2.0, scale=5.0), "inversion")
    rng = np.random.default_rng(8)
    first, second = s.sample(100, rng), s.sample(100, rng)
    assert first.tolist() != second.tolist()
    # Two calls on one Generator equal one call of twice the size (one uniform per draw).
    assert np.concatenate([first, second]).tolist() == s.sample(200, 8).tolist()


# ---- applicability ---------------------------------------------------------------------------

def test_numerical_inversion_refuses_a_target_with_atoms():
    from lifedraw.engine.methods.inversion import NumericalInversion
    data = lifedraw.failure_times([5.0, 8.0, 12.0, 20.0])
    with pytest.raises(MethodNotApplicable) as err:
        NumericalInversion.build(data)
    assert "atoms" in err.value.reason


def test_inversion_of_a_product_limit_target_is_exact_on_its_atoms():
    data = lifedraw.failure_times([10, 32, 56, 98, 122, 181, 50, 100, 125, 150] + [200] * 10, [False] * 6 + [True] * 14)
    s = fit(data, "inversion")
    # With atoms, exact inversion gives F(x-) <= u <= F(x); the report counts only violations.
    assert s.stats["u_error"] <= 1e-14
