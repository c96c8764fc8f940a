"""What is reused between set-ups, and that reuse never carries numbers across models.

Formula.parse keeps parsed formulas by text and parameter names (never values). The checks below
build models that share a formula but not their numbers, alternately, and hold each against its own
outside reference: scipy.stats.gengamma (f ~ t^(k-1) exp(-(t/s)^p) is gengamma(a=k/p, c=p, scale=s))
and its truncation to a finite support (F(t)/F(hi)).
"""
import math

import numpy as np
import pytest
from scipy import stats

import lifedraw
from lifedraw import engine
from lifedraw.engine.formula import Formula

TEXT = "t**(k - 1)*exp(-(t/s)**p)"
# The sampler's u-error is at most its tolerance 1e-10; scipy's cdf adds its own rounding.
U_TOL = 2e-10
U = np.concatenate([np.logspace(-9, -1, 9), np.linspace(0.1, 0.9, 9), 1 - np.logspace(-1, -9, 9)])


def test_the_same_text_and_names_give_the_same_parsed_formula_and_other_names_another():
    a = Formula.parse(TEXT, params=("k", "p", "s"))
    assert Formula.parse(TEXT, params=("k", "p", "s")) is a
    other = Formula.parse(TEXT, params=("k", "p", "s", "unused"))
    assert other is not a and other.params == ("k", "p", "s", "unused")
    assert a.derivative() is a.derivative()          # made once, shared by every model of the text


def test_a_parse_error_is_raised_every_time_not_remembered_as_a_formula():
    for _ in range(2):
        with pytest.raises(lifedraw.ModelError, match="unknown name 'q'"):
            Formula.parse("t*q", params=("k",))


@pytest.mark.parametrize("order", ["ABA", "BAB"])
def test_models_sharing_a_formula_keep_their_own_parameters(order):
    laws = {"A": dict(k=2.5, p=1.6, s=1.0), "B": dict(k=4.0, p=0.8, s=3.0)}
    for name in order:
        values = laws[name]
        sampler = engine.fit(lifedraw.density_formula(TEXT, (0, math.inf), values), "inversion", 1e-10)
        ref = stats.gengamma(a=values["k"] / values["p"], c=values["p"], scale=values["s"])
        x = sampler.quantile(U)
        got = np.where(U > 0.5, ref.sf(x), ref.cdf(x))
        want = np.where(U > 0.5, 1 - U, U)
        assert np.max(np.abs(got - want)) <= U_TOL, name


def test_models_sharing_a_formula_and_numbers_keep_their_own_support():
    values = dict(k=2.5, p=1.6, s=1.0)
    ref = stats.gengamma(a=values["k"] / values["p"], c=values["p"], scale=values["s"])
    for hi in (math.inf, 2.0, math.inf, 1.0):
        sampler = engine.fit(lifedraw.density_formula(TEXT, (0, hi), values), "inversion", 1e-10)
        top = ref.cdf(hi) if np.isfinite(hi) else 1.0
        x = sampler.quantile(U)
        assert np.all(x <= hi)
        got = ref.cdf(x) / top
        # Relative to the truncated law: scipy's F(x)/F(hi); upper u through (F(hi) - F(x))/F(hi).
        got_upper = (ref.sf(x) - ref.sf(hi)) / top if np.isfinite(hi) else ref.sf(x)
        err = np.where(U > 0.5, np.abs(got_upper - (1 - U)), np.abs(got - U))
        assert np.max(err) <= U_TOL, hi


def test_hazard_models_sharing_a_formula_keep_their_own_parameters():
    # h = a*b*t^(b-1) is the Weibull hazard with scale a^(-1/b) (scipy.stats.weibull_min).
    for a, b in ((1.0, 2.5), (0.2, 0.7), (1.0, 2.5)):
        sampler = engine.fit(lifedraw.hazard_formula("a*b*t**(b - 1)", (0, math.inf), dict(a=a, b=b)),
                             "inversion", 1e-10)
        ref = stats.weibull_min(b, scale=a ** (-1.0 / b))
        x = sampler.quantile(U)
        err = np.where(U > 0.5, np.abs(ref.sf(x) - (1 - U)), np.abs(ref.cdf(x) - U))
        assert np.max(err) <= U_TOL, (a, b)
