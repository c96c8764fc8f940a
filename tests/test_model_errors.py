"""Specification of bad input: every case in the issue's list raises engine.ModelError naming the
field and saying why.

References: the issue's bad-input list; Python's exception hierarchy (a ModelError is a ValueError).
"""
import math

import pytest

import lifedraw
from lifedraw import engine
from lifedraw.engine import MethodNotApplicable, ModelError, Target, fit

INF = math.inf


def weibull():
    return lifedraw.family("weibull", shape=2.0, scale=100.0)


# (id, what the user does, field named, words the reason must contain)
BAD_INPUTS = [
    # Formulas that try to run code or reach attributes.
    ("import and call", lambda: lifedraw.density_formula('__import__("os").system("x")'), "formula",
     ["only the named functions can be called"]),
    ("attribute access", lambda: lifedraw.density_formula("t.__class__"), "formula", ["attribute access not allowed"]),
    ("attribute chain with indexing", lambda: lifedraw.density_formula("().__class__.__bases__[0]"), "formula",
     ["not allowed"]),
    ("lambda", lambda: lifedraw.density_formula("lambda: 1"), "formula", ["lambda", "not allowed"]),
    ("builtin call", lambda: lifedraw.density_formula("open('f')"), "formula", ["unknown function 'open'"]),
    ("assignment", lambda: lifedraw.density_formula("x = 3", (0.0, 1.0)), "formula", ["syntax error", "column"]),
    # Unknown names and syntax errors (the message says where).
    ("unknown name", lambda: lifedraw.density_formula("exp(-t/q)"), "formula", ["unknown name 'q'", "column 8"]),
    ("unknown function", lambda: lifedraw.density_formula("foo(t)"), "formula", ["unknown function 'foo'"]),
    ("unclosed parenthesis", lambda: lifedraw.density_formula("exp(-t/2"), "formula", ["syntax error", "never closed",
                                                                          "column"]),
    ("dangling operator", lambda: lifedraw.density_formula("t ** * 2"), "formula", ["syntax error", "column 6"]),
    ("empty formula", lambda: lifedraw.density_formula(""), "formula", ["empty"]),
    # Densities negative, NaN or infinite on the support.
    ("negative density", lambda: lifedraw.density_formula("t - 5", (0.0, 10.0)), "formula", ["negative", "at t ="]),
    ("NaN density", lambda: lifedraw.density_formula("log(t - 5)", (0.0, 10.0)), "formula", ["not finite", "at t ="]),
    ("NaN density from sqrt", lambda: lifedraw.density_formula("sqrt(t - 5)", (0.0, 10.0)), "formula", ["not finite"]),
    ("infinite density", lambda: lifedraw.density_formula("1/(t-5)**2", (0.0, 10.0)), "formula", ["not finite", "t = 5"]),
    # Zero and infinite area.
    ("zero area", lambda: lifedraw.density_formula("0*t"), "formula", ["0 everywhere", "no area"]),
    ("tail too heavy", lambda: lifedraw.density_formula("1/(1+t)", (0.0, INF)), "formula",
     ["area under it is infinite", "faster than 1/t"]),
    # Hazard rates and CDFs that are not lifetime models.
    ("negative hazard", lambda: lifedraw.hazard_formula("-t"), "formula", ["negative"]),
    ("hazard that lets units live forever", lambda: lifedraw.hazard_formula("1/(1+t)**2"), "formula", ["never fail"]),
    ("decreasing CDF", lambda: lifedraw.cdf_formula("1 - t", (0.0, 1.0)), "formula", ["decreases"]),
    ("CDF above one", lambda: lifedraw.cdf_formula("t"), "formula", ["must stay in [0, 1]"]),
    # NaN or out-of-range parameters.
    ("weibull shape -1", lambda: lifedraw.family("weibull", shape=-1.0, scale=1.0), "shape", ["must be > 0"]),
    ("weibull scale NaN", lambda: lifedraw.family("weibull", shape=2.0, scale=float("nan")), "scale", ["NaN"]),
    ("formula parameter NaN", lambda: lifedraw.density_formula("exp(-t/k)", (0.0, INF), {"k": float("nan")}), "k",
     ["NaN"]),
    ("reversed support", lambda: lifedraw.density_formula("exp(-t)", (5.0, 1.0)), "support", ["lower end must be below"]),
    # Unknown family.
    ("unknown family", lambda: lifedraw.family("weibul", shape=2.0, scale=1.0), "family", ["unknown family"]),
    # Histograms.
    ("negative count", lambda: lifedraw.binned_counts([0, 10, 20], [3, -1]), "counts", ["negative"]),
    ("unsorted edges", lambda: lifedraw.binned_counts([0, 20, 10], [3, 1]), "edges", ["must increase"]),
    ("counts and edges mismatched", lambda: lifedraw.binned_counts([0, 10, 20], [1, 2, 3]), "counts",
     ["expected 2 counts"]),
    # Failure data.
    ("no failure data", lambda: lifedraw.failure_times([]), "times", ["no data"]),
    ("negative failure time", lambda: lifedraw.failure_times([5.0, -1.0]), "times", ["negative"]),
    ("all suspensions", lambda: lifedraw.failure_times([5.0, 6.0], [True, True]), "censored", ["at least one failure"]),
    # Mixtures.
    ("weights not matching components", lambda: lifedraw.mixture([weibull(), weibull()], [1.0]), "weights",
     ["1 weights for 2 components"]),
    ("negative weight", lambda: lifedraw.mixture([weibull(), weibull()], [1.0, -0.5]), "weights", [">= 0"]),
    # Survival ages outside the support.
    ("age beyond the support", lambda: lifedraw.binned_counts([0, 10, 20], [1, 1]).given_survival(25.0), "age",
     ["beyond the end of the support"]),
    ("age where reliability underflows", lambda: weibull().given_survival(5000.0), "age", ["underflows"]),
    ("negative age", lambda: weibull().given_survival(-1.0), "age", [">= 0"]),
    # Sample sizes that cannot fit in memory point to the chunked generator.
    ("sample too large for memory", lambda: fit(weibull(), "inversion").sample(10**15, 1), "n",
     ["fits in memory", "engine.generate"]),
    ("negative sample size", lambda: fit(weibull(), "inversion").sample(-5, 1), "n", [">= 0"]),
    ("fractional sample size", lambda: fit(weibull(), "inversion").sample(2.5, 1), "n", ["whole number"]),
    # Sampler settings.
    ("unknown method", lambda: fit(weibull(), "fastest"), "method", ["unknown method"]),
    ("tolerance below double precision", lambda: fit(weibull(), "inversion", tolerance=1e-20), "tolerance",
     ["between 1e-14"]),
]


@pytest.mark.parametrize("make, field, words", [c[1:] for c in BAD_INPUTS], ids=[c[0] for c in BAD_INPUTS])
def test_bad_input_raises_model_error_naming_the_field_and_why(make, field, words):
    with pytest.raises(ModelError) as err:
        make()
    assert err.value.field == field
    for w in words:
        assert w in err.value.reason
    # The message a user reads is "field: reason".
    assert str(err.value) == f"{field}: {err.value.reason}"


def test_model_error_is_a_value_error():
    # Callers that only know Python's conventions can catch bad input as ValueError.
    assert issubclass(ModelError, ValueError)
    with pytest.raises(ValueError):
        lifedraw.family("weibull", shape=-1.0, scale=1.0)


def test_method_not_applicable_is_a_model_error():
    assert issubclass(MethodNotApplicable, ModelError)
    from lifedraw.engine.methods.inversion import NumericalInversion
    with pytest.raises(ModelError) as err:
        NumericalInversion.build(lifedraw.failure_times([5.0, 8.0, 12.0]))
    assert isinstance(err.value, MethodNotApplicable)
    assert err.value.field == "method"


def test_engine_exposes_both_errors_at_the_top_level():
    assert engine.ModelError is ModelError
    assert engine.MethodNotApplicable is MethodNotApplicable
