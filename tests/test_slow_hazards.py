"""Hazard-rate formulas whose cumulative hazard grows slowly (like log t) are lifetime models:
accepted, exact in both tails, sampled by every applicable method; hazards whose cumulative
hazard levels off are refused with the limit and the share of units that would never fail.

References: scipy.stats.fisk (log-logistic), lomax (Pareto II), pareto (Pareto I) and
lognorm, each written as its hazard h = f/R; closed forms R = exp(-H) for each (named at
each case); scipy.stats.kstest; the dashboard's state path (lifedraw.dashboard.state).
"""
import functools
import math

import numpy as np
import pytest
from scipy import stats

import lifedraw
from lifedraw.dashboard.state import DrawingBoard
from lifedraw.engine import ModelError
from lifedraw.engine.sampling import applicable_methods

# name -> (hazard formula, support, parameters, the scipy.stats law it is the hazard of)
CASES = {
    # Log-logistic: h = (b/a)(t/a)^(b-1)/(1 + (t/a)^b), H = ln(1 + (t/a)^b); scipy.stats.fisk(b, scale=a).
    "log-logistic": ("(b/a)*(t/a)**(b-1)/(1+(t/a)**b)", (0.0, math.inf), dict(a=800.0, b=3.0),
                     stats.fisk(3.0, scale=800.0)),
    # Lomax (Pareto II): h = b/(a + t), H = b ln(1 + t/a); scipy.stats.lomax(b, scale=a).
    "lomax": ("b/(a+t)", (0.0, math.inf), dict(a=200.0, b=2.5), stats.lomax(2.5, scale=200.0)),
    # Pareto I: h = b/t on (a, inf), H = b ln(t/a); scipy.stats.pareto(b, scale=a). Infinite variance.
    "pareto": ("b/t", (100.0, math.inf), dict(b=1.5), stats.pareto(1.5, scale=100.0)),
    # Lognormal: h = phi(z)/(s t (1 - Phi(z))), z = ln(t/m)/s, with 1 - Phi(z) = erfc(z/sqrt 2)/2;
    # scipy.stats.lognorm(s, scale=m). H grows like (ln t)^2, the formula breaks down (0/0)
    # only where exp(-H) has underflowed.
    "lognormal": ("exp(-(log(t/m))**2/(2*s*s))/(s*t*sqrt(2*pi)*0.5*erfc(log(t/m)/(s*sqrt(2))))",
                  (0.0, math.inf), dict(m=5000.0, s=0.8), stats.lognorm(0.8, scale=5000.0)),
}
NAMES = list(CASES)

# Probabilities from the far lower tail to the far upper tail (u = 1 - 1e-12 included).
V = np.array([1e-12, 1e-9, 1e-6, 1e-3, 0.05, 0.2, 0.5])
U = np.concatenate([V, 1.0 - V[::-1]])
# The engine integrates H to ~1e-14 relative (engine.numeric.CumulativeIntegral); quantiles
# come from root polishing to a few ulps. 1e-10 is the accuracy the formula tests ask for.
RTOL = 1e-10


@functools.lru_cache(maxsize=None)
def model(name):
    expr, support, params, _ = CASES[name]
    return lifedraw.hazard_formula(expr, support=support, params=params)


def reference(name):
    return CASES[name][3]


def rel_err(got, want):
    got, want = np.asarray(got, dtype=float), np.asarray(want, dtype=float)
    return float(np.max(np.abs(got - want) / np.abs(want)))


@pytest.mark.parametrize("name", NAMES)
def test_a_slowly_growing_cumulative_hazard_is_accepted_and_r_underflows_at_the_end(name):
    target = model(name)
    lo, end = target.support
    assert lo == CASES[name][1][0]
    # Past the support's end no unit survives in double precision (H > 36.7: R < 2^-53).
    assert float(target.cumulative_hazard(np.nextafter(end, 0.0))) > 36.7


@pytest.mark.parametrize("name", NAMES)
def test_quantiles_match_scipy_out_to_u_one_minus_1e12(name):
    ref = reference(name)
    # For u > 1/2, 1 - u is exact (Sterbenz), so scipy's isf of it is the exact reference.
    want = np.where(U > 0.5, ref.isf(1.0 - U), ref.ppf(U))
    got = model(name).quantile(U)
    # An age is known to within its own spacing of doubles at best (next to the Pareto's
    # lo = 100, t - lo = 7e-11 has only absolute digits), so allow 4 ulps beside RTOL.
    assert np.all(np.abs(got - want) <= RTOL * np.abs(want) + 4 * np.spacing(want))


@pytest.mark.parametrize("name", NAMES)
def test_upper_tail_isf_matches_scipy_isf(name):
    assert rel_err(model(name).isf(V), reference(name).isf(V)) <= RTOL


@pytest.mark.parametrize("name", ["log-logistic", "lomax", "pareto"])
def test_cumulative_hazard_is_the_closed_form_over_hundreds_of_decades(name):
    a, b = CASES[name][2].get("a", 100.0), CASES[name][2]["b"]
    closed = {  # the closed forms named in CASES
        "log-logistic": lambda t: np.log1p((t / a) ** b),
        "lomax": lambda t: b * np.log1p(t / a),
        "pareto": lambda t: b * np.log1p((t - a) / a),   # t - a is exact (Sterbenz) near a
    }[name]
    lo, end = model(name).support
    t = lo + np.logspace(-3, math.log10(end - lo) - 1, 400)
    assert rel_err(model(name).cumulative_hazard(t), closed(t)) <= 1e-12


@pytest.mark.parametrize("name", NAMES)
def test_mttf_is_scipy_mean(name):
    # Heavy tails (Pareto I with b = 1.5: R ~ t^-1.5) need MTTF = integral of R over hundreds of decades.
    assert model(name).mean() == pytest.approx(reference(name).mean(), rel=1e-10)


def test_pareto_with_b_below_two_has_infinite_variance_as_scipy_says():
    assert math.isinf(model("pareto").var()) and math.isinf(reference("pareto").var())


def test_lomax_variance_is_scipy_variance():
    assert model("lomax").var() == pytest.approx(reference("lomax").var(), rel=1e-9)


@pytest.mark.parametrize("name", NAMES)
def test_every_applicable_method_draws_the_scipy_law(name):
    # 10^5 draws per method, fixed seed: a KS p-value below 1e-3 would be a real fault
    # (a sampler of the wrong law at this size gives p far below that).
    methods = [m for m, why in applicable_methods(model(name)).items() if why is None]
    assert {"inversion", "rejection"} <= set(methods)
    for method in methods:
        x = lifedraw.fit(model(name), method).sample(100_000, rng=20261202)
        assert stats.kstest(x, reference(name).cdf).pvalue > 1e-3, method


@pytest.mark.parametrize("name", NAMES)
@pytest.mark.parametrize("tolerance", [1e-10, 1e-12])
def test_inversion_u_error_measured_against_scipy_is_within_the_tolerance(name, tolerance):
    # u-error (Derflinger, Hörmann & Leydold 2010): |u - F(Q(u))|, measured here with scipy's
    # F (and its sf above 1/2), on a dense grid plus the far tails out to u = 1 - 1e-12.
    sampler = lifedraw.fit(model(name), "inversion", tolerance=tolerance)
    ref = reference(name)
    u = np.unique(np.concatenate([(np.arange(20_000) + 0.5) / 20_000, U]))
    x = sampler.quantile(u)
    with np.errstate(divide="ignore"):      # scipy's log-logistic sf takes log1p(-1) far out (its value is 0)
        err = np.where(u < 0.5, np.abs(u - ref.cdf(x)), np.abs((1.0 - u) - ref.sf(x)))
    assert float(np.max(err)) <= tolerance


# ---- refused: the cumulative hazard levels off ------------------------------------------------

def test_a_hazard_whose_cumulative_hazard_levels_off_is_refused_with_its_limit_and_share():
    # h = exp(-t/100): H(t) = 100 (1 - exp(-t/100)) -> 100, so exp(-100) = 3.72e-44 never fail.
    with pytest.raises(ModelError) as err:
        lifedraw.hazard_formula("exp(-t/100)")
    assert "tends to about 100 " in err.value.reason
    assert f"{math.exp(-100):.3g}" in err.value.reason


def test_a_hazard_that_switches_off_early_is_refused_with_the_share_that_never_fails():
    # h = 0.001 up to t = 1000, then 0: H -> 1, so exp(-1) = 36.8 % never fail (closed form).
    with pytest.raises(ModelError) as err:
        lifedraw.hazard_formula("when(t < 1000, 0.001, 0)")
    assert "tends to about 1 " in err.value.reason and "0.368" in err.value.reason


def test_a_power_law_hazard_faster_than_one_over_t_is_refused_with_its_extrapolated_limit():
    # h = (1 + t)^-1.01: H -> integral_0^inf (1+t)^-1.01 dt = 1/0.01 = 100 (closed form).
    with pytest.raises(ModelError) as err:
        lifedraw.hazard_formula("(1+t)**-1.01")
    assert "tends to about 100 " in err.value.reason


def test_a_log_growth_too_slow_for_double_precision_is_refused_with_the_share_beyond():
    # Lomax with b = 0.02: R(1e300) = (1 + 1e300/200)^-0.02 = 1.1e-6 (closed form) of the units
    # would outlive the farthest age a double-precision sampler can reach.
    with pytest.raises(ModelError) as err:
        lifedraw.hazard_formula("b/(a+t)", params=dict(a=200.0, b=0.02))
    share = (1.0 + 1e300 / 200.0) ** -0.02
    assert f"{share:.3g}" in err.value.reason


# ---- the dashboard's hazard path ----------------------------------------------------------------

@pytest.mark.parametrize("name", ["log-logistic", "lomax"])
def test_the_drawing_board_accepts_a_slow_hazard_and_its_draws_follow_scipy(name):
    expr, _, params, ref = CASES[name]
    wb = DrawingBoard("gearbox-wearout", batch_size=20_000)
    assert wb.apply_formula("hazard", expr, "0, inf", ", ".join(f"{k} = {v:g}" for k, v in params.items()))
    assert wb.errors == {}
    wb.step()
    assert wb.acc.x.size == 40_000
    # The page's own KS test and scipy's on the same draws; fixed seed, threshold as above.
    assert wb.ks()[1] > 1e-3
    assert stats.kstest(wb.acc.x, ref.cdf).pvalue > 1e-3
    exact = wb.life_figures()["exact"]
    assert exact["b_lives"]["B10"]["value"] == pytest.approx(ref.ppf(0.10), rel=1e-10)
    assert exact["mttf"]["value"] == pytest.approx(ref.mean(), rel=1e-10)


def test_the_drawing_board_shows_why_a_defective_hazard_is_refused_and_keeps_the_last_model():
    wb = DrawingBoard("gearbox-wearout", batch_size=10_000)
    before = wb.target
    assert not wb.apply_formula("hazard", "exp(-t/100)", "0, inf", "")
    assert wb.target is before
    assert "never fail" in next(iter(wb.errors.values()))
