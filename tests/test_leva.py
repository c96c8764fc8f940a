"""Specifications for Leva's normal generator (engine/methods/leva.py).

References: J. L. Leva (1992), "A fast normal random number generator", ACM TOMS
18(4) 449-453 (constants, the 0.012 share of logarithms, 2.74 uniforms per deviate);
Kinderman & Monahan (1977), ACM TOMS 3(3) 257-260 (area of A, the rectangle);
scipy.stats (normal and lognormal laws).
"""
import math

import numpy as np
import pytest
from references import from_scipy, verdict
from scipy import integrate, stats

import lifedraw
from lifedraw.engine import MethodNotApplicable, Target
from lifedraw.engine import methods as method_registry
from lifedraw.engine.methods import leva as leva_module
from lifedraw.engine.methods.leva import LevaNormal, leva_applies
from lifedraw.engine.methods.ratio_of_uniforms import RatioOfUniforms
from lifedraw.engine.storage import load_sampler

# Leva (1992), the algorithm's constants, restated here from the paper (from memory; the same
# values appear in Numerical Recipes, 3rd ed., sec. 7.3.9, "Normaldev", also from memory):
# centre (s, t) and coefficients (a, b) of q = x^2 + y (a y - b x), x = u - s, y = |v| - t;
# q < r1 accepts, q > r2 rejects; v = 1.7156 (U - 1/2). Not imported from the engine.
S, T = 0.449871, -0.386595
A, B = 0.19600, 0.25472
R1, R2 = 0.27597, 0.27846
V_SPAN = 1.7156

SEED = 19920401
N_COUNT = 10**6        # draws for the cost counters
N_KS = 200_000         # draws for goodness of fit
# KS at n = 2e5 and alpha = 1e-3 is weak on a spread error: with the sd 1 % too large it rejected
# 6 times in 40 seeds (issue 15), 3 in 30 (tests/test_fault_injection.py). A variance z-test
# carries that case: 30/30 at n = 2e5 there; the one below, at n = 1e6, has z ~ 14 for it.
KS_ALPHA = 1e-3


@pytest.fixture(scope="module")
def counted():
    """A standard normal sampler after N_COUNT draws (the counters are what is tested)."""
    sampler = LevaNormal.build(lifedraw.family("normal", mean=0.0, sd=1.0))
    sampler.sample(N_COUNT, SEED)
    return sampler


def band_area() -> float:
    """Area of {r1 <= q(u, v) <= r2} inside Leva's rectangle, by integrating over |v|
    the length of the u-interval between the two ellipses (q is quadratic in u)."""
    def length(a, r):
        y = a - T
        centre = B * y / 2.0
        disc = centre**2 - A * y * y + r
        if disc <= 0:
            return 0.0
        lo, hi = centre - math.sqrt(disc) + S, centre + math.sqrt(disc) + S
        return max(0.0, min(hi, 1.0) - max(lo, 0.0))

    half = V_SPAN / 2.0
    value, _ = integrate.quad(lambda a: length(a, R2) - length(a, R1), 0.0, half, limit=400, epsabs=1e-12)
    return 2.0 * value


def test_the_engine_uses_the_published_constants():
    assert (leva_module.S, leva_module.T, leva_module.A, leva_module.B) == (S, T, A, B)
    assert (leva_module.R1, leva_module.R2, leva_module.V_SPAN) == (R1, R2, V_SPAN)


def test_logarithm_is_needed_for_about_1_2_percent_of_deviates(counted):
    # Leva (1992), abstract: the logarithm is evaluated for 0.012 of the deviates.
    # Tolerance: 0.0005 for the published figure's rounding to two digits, plus 4
    # binomial standard errors of the count (log evaluations ~ Binomial(candidates, p)).
    c = counted.counts
    share = c["log_evals"] / c["accepted"]
    p = c["log_evals"] / c["candidates"]
    se = math.sqrt(c["candidates"] * p * (1 - p)) / c["accepted"]
    assert abs(share - 0.012) <= 0.0005 + 4 * se


def test_logarithm_share_matches_the_area_between_the_two_ellipses(counted):
    # The share is exactly area(r1 <= q <= r2) / area(A), area(A) = sqrt(2 pi)/2 for
    # exp(-z^2/2) (Kinderman & Monahan 1977); 4 binomial standard errors.
    c = counted.counts
    expected = band_area() / (math.sqrt(2 * math.pi) / 2)
    p = c["log_evals"] / c["candidates"]
    se = math.sqrt(c["candidates"] * p * (1 - p)) / c["accepted"]
    assert abs(c["log_evals"] / c["accepted"] - expected) <= 4 * se


def test_density_evaluations_are_the_logarithm_evaluations(counted):
    assert counted.counts["density_evals"] == counted.counts["log_evals"]


def test_acceptance_rate_is_area_of_A_over_the_rectangle(counted):
    # Kinderman & Monahan (1977): expected trials 4/sqrt(pi e) = 1.3688 for the minimal
    # rectangle; Leva's slightly wider v-range 1.7156 > 2 sqrt(2/e) gives sqrt(2 pi)/2/1.7156
    # = 0.73054 (vs 0.73057). Tolerance: 4 binomial standard errors (about 0.0015).
    c = counted.counts
    acc = c["accepted"] / c["candidates"]
    expected = math.sqrt(2 * math.pi) / 2 / V_SPAN
    se = math.sqrt(expected * (1 - expected) / c["candidates"])
    assert abs(acc - expected) <= 4 * se
    assert abs(expected - 1 / 1.3688) < 1e-4     # published constant, for the record


def test_two_uniforms_per_candidate_and_2_74_per_deviate(counted):
    # Leva (1992): 2.74 uniform deviates per normal deviate on average.
    # Tolerance: 0.005 for the rounding to three digits, plus 4 standard errors of
    # 2/acceptance (delta method: se(acc)/acc^2 times 2).
    c = counted.counts
    assert c["uniforms"] == 2 * c["candidates"]
    acc = c["accepted"] / c["candidates"]
    se = 2 * math.sqrt(acc * (1 - acc) / c["candidates"]) / acc**2
    assert abs(c["uniforms"] / c["accepted"] - 2.74) <= 0.005 + 4 * se


def test_inner_ellipse_lies_inside_A_and_outer_ellipse_outside():
    # The published constants must give squeezes on the right sides of the exact
    # boundary v^2 = -4 u^2 ln u (Leva 1992, Fig. 1), checked on a 1000 x 1000 grid.
    u = (np.arange(1000) + 0.5) / 1000
    v = (np.arange(1000) + 0.5) / 1000 * V_SPAN - V_SPAN / 2
    U, Vg = np.meshgrid(u, v)
    x, y = U - S, np.abs(Vg) - T
    q = x * x + y * (A * y - B * x)
    inside = Vg**2 <= -4 * U**2 * np.log(U)
    assert np.all(inside[q < R1])
    assert not np.any(inside[q > R2])


def test_normal_draws_follow_scipy_normal():
    target = lifedraw.family("normal", mean=1000.0, sd=80.0)
    x = LevaNormal.build(target).sample(N_KS, SEED)
    assert stats.kstest(x, stats.norm(loc=1000.0, scale=80.0).cdf).pvalue > KS_ALPHA


def test_standard_normal_variance_and_fourth_moment_are_one_and_three():
    # Normal moments (closed form): Var(s^2) = 2 sigma^4 / (n - 1), E z^4 = 3 with
    # Var(mean z^4) = (105 - 9)/n. At n = 1e6 a 1 % sd error is z ~ 14 for the variance.
    z = LevaNormal.build(lifedraw.family("normal", mean=0.0, sd=1.0)).sample(10**6, SEED + 2)
    n = z.size
    assert abs(np.var(z, ddof=1) - 1.0) / math.sqrt(2.0 / (n - 1)) < 5
    assert abs(np.mean(z**4) - 3.0) / math.sqrt(96.0 / n) < 5


def test_lognormal_with_location_follows_scipy_lognormal():
    # scipy's lognorm(s=sigma, loc=location, scale=exp(mu)).
    target = lifedraw.family("lognormal", mu=4.0, sigma=0.6, location=25.0)
    x = LevaNormal.build(target).sample(N_KS, SEED + 1)
    ref = stats.lognorm(s=0.6, loc=25.0, scale=math.exp(4.0))
    assert stats.kstest(x, ref.cdf).pvalue > KS_ALPHA


@pytest.mark.parametrize("make, frozen", [
    (lambda: lifedraw.family("normal", mean=1000.0, sd=80.0), stats.norm(1000.0, 80.0)),
    (lambda: lifedraw.family("lognormal", mu=4.0, sigma=0.6, location=25.0),
     stats.lognorm(0.6, loc=25.0, scale=math.exp(4.0))),
], ids=["normal", "lognormal"])
def test_draws_pass_the_suites_verdict_against_scipy(make, frozen):
    # lifedraw.check against scipy's law plus the variance z-test (tests/references.py) at
    # n = 2e5, where a 1 % sd error was rejected 30/30 (tests/test_fault_injection.py).
    passed, why = verdict(LevaNormal.build(make()), from_scipy(frozen, frozen.dist.name), 200_000, SEED + 3)
    assert passed, why


def test_ratio_of_uniforms_request_for_a_normal_uses_leva():
    sampler = RatioOfUniforms.build(lifedraw.family("normal", mean=5.0, sd=2.0))
    assert isinstance(sampler, LevaNormal)
    assert sampler.method == "ratio-of-uniforms"
    assert sampler.stats["variant"] == "Leva 1992 quadratic squeezes"


def test_leva_applies_to_normal_and_lognormal_only():
    assert leva_applies(lifedraw.family("normal", mean=0.0, sd=1.0))
    assert leva_applies(lifedraw.family("lognormal", mu=0.0, sigma=1.0))
    assert not leva_applies(lifedraw.family("weibull", shape=2.0, scale=1.0))
    # Residual life of a normal unit is no longer normal.
    assert not leva_applies(lifedraw.family("normal", mean=10.0, sd=1.0).given_survival(9.0))


def test_leva_refuses_other_families_with_a_reason():
    with pytest.raises(MethodNotApplicable, match="normal and lognormal"):
        LevaNormal.build(lifedraw.family("weibull", shape=2.0, scale=1.0))


def test_saved_and_loaded_sampler_draws_the_same_values(tmp_path, monkeypatch):
    monkeypatch.setitem(method_registry._ALL_CLASSES, "LevaNormal", LevaNormal)
    sampler = LevaNormal.build(lifedraw.family("lognormal", mu=1.0, sigma=0.3, location=2.0))
    path = tmp_path / "leva.npz"
    sampler.save(path)
    loaded = load_sampler(path)
    assert isinstance(loaded, LevaNormal)
    np.testing.assert_array_equal(loaded.sample(50_000, SEED), sampler.sample(50_000, SEED))


def test_geometry_labels_candidates_by_how_they_were_decided():
    g = LevaNormal.build(lifedraw.family("normal", mean=0.0, sd=1.0)).geometry(2000, rng=SEED)
    u, v, label = g["candidates_u"], g["candidates_v"], g["candidates_label"]
    in_A = v**2 <= -4 * u**2 * np.log(u)
    assert set(np.unique(label)) <= {"accepted", "rejected", "squeeze"}
    assert np.all(in_A[label != "rejected"]) and not np.any(in_A[label == "rejected"])
    assert np.all((g["boundary_u"] > 0) & (g["boundary_u"] <= 1.0))


@pytest.mark.parametrize("n", [1_000, 3 * leva_module.BLOCK + 17], ids=["one block", "several blocks"])
def test_deviates_are_the_accepted_ratios_of_the_uniform_stream_in_order(n):
    # Kinderman & Monahan (1977): from uniforms read in pairs, (u, v) = (1 - U1, 1.7156 (U2 - 1/2))
    # is accepted exactly when v^2 <= -4 u^2 ln u, and the deviate is v/u. Applying only that
    # test (no squeezes) to the same stream must give the sampler's deviates, in order, one for
    # one: the squeezes may change no verdict, and blocks may lose, repeat or reorder no candidate.
    sampler = LevaNormal.build(lifedraw.family("normal", mean=0.0, sd=1.0))
    z = sampler.standard_normal(n, np.random.default_rng(SEED))
    pairs = np.random.default_rng(SEED).random(2 * (2 * n + 1000))
    u, v = 1.0 - pairs[0::2], (pairs[1::2] - 0.5) * V_SPAN
    kept = v * v <= -4.0 * u * u * np.log(u)
    expected = (v / u)[kept][:n]
    assert expected.size == n
    np.testing.assert_array_equal(z, expected)
