"""Specification of bad input: every case in the issue's list raises engine.ModelError naming the
field and saying why.

References: the issue's bad-input list; Python's exception hierarchy (a ModelError is a ValueError).
"""
import math

import pytest

import engine
from engine import MethodNotApplicable, ModelError, Target, fit

INF = math.inf


def weibull():
    return Target.family("weibull", shape=2.0, scale=100.0)


# (id, what the user does, field named, words the reason must contain)
BAD_INPUTS = [
    # Formulas that try to run code or reach attributes.
    ("import and call", lambda: Target.density('__import__("os").system("x")'), "formula",
     ["only the named functions can be called"]),
    ("attribute access", lambda: Target.density("t.__class__"), "formula", ["attribute access not allowed"]),
    ("attribute chain with indexing", lambda: Target.density("().__class__.__bases__[0]"), "formula",
     ["not allowed"]),
    ("lambda", lambda: Target.density("lambda: 1"), "formula", ["lambda", "not allowed"]),
    ("builtin call", lambda: Target.density("open('f')"), "formula", ["unknown function 'open'"]),
    ("assignment", lambda: Target.density("x = 3", (0.0, 1.0)), "formula", ["syntax error", "column"]),
    # Unknown names and syntax errors (the message says where).
    ("unknown name", lambda: Target.density("exp(-t/q)"), "formula", ["unknown name 'q'", "column 8"]),
    ("unknown function", lambda: Target.density("foo(t)"), "formula", ["unknown function 'foo'"]),
    ("unclosed parenthesis", lambda: Target.density("exp(-t/2"), "formula", ["syntax error", "never closed",
                                                                          "column"]),
    ("dangling operator", lambda: Target.density("t ** * 2"), "formula", ["syntax error", "column 6"]),
    ("empty formula", lambda: Target.density(""), "formula", ["empty"]),
    # Densities negative, NaN or infinite on the support.
    ("negative density", lambda: Target.density("t - 5", (0.0, 10.0)), "formula", ["negative", "at t ="]),
    ("NaN density", lambda: Target.density("log(t - 5)", (0.0, 10.0)), "formula", ["not finite", "at t ="]),
    ("NaN density from sqrt", lambda: Target.density("sqrt(t - 5)", (0.0, 10.0)), "formula", ["not finite"]),
    ("infinite density", lambda: Target.density("1/(t-5)**2", (0.0, 10.0)), "formula", ["not finite", "t = 5"]),
    # Zero and infinite area.
    ("zero area", lambda: Target.density("0*t"), "formula", ["0 everywhere", "no area"]),
    ("tail too heavy", lambda: Target.density("1/(1+t)", (0.0, INF)), "formula",
     ["does not converge", "tail too heavy"]),
    # Hazard rates and CDFs that are not lifetime models.
    ("negative hazard", lambda: Target.hazard("-t"), "formula", ["negative"]),
    ("hazard that lets units live forever", lambda: Target.hazard("1/(1+t)**2"), "formula", ["never fail"]),
    ("decreasing CDF", lambda: Target.cdf_formula("1 - t", (0.0, 1.0)), "formula", ["decreases"]),
    ("CDF above one", lambda: Target.cdf_formula("t"), "formula", ["must stay in [0, 1]"]),
    # NaN or out-of-range parameters.
    ("weibull shape -1", lambda: Target.family("weibull", shape=-1.0, scale=1.0), "shape", ["must be > 0"]),
    ("weibull scale NaN", lambda: Target.family("weibull", shape=2.0, scale=float("nan")), "scale", ["NaN"]),
    ("formula parameter NaN", lambda: Target.density("exp(-t/k)", (0.0, INF), {"k": float("nan")}), "k",
     ["NaN"]),
    ("reversed support", lambda: Target.density("exp(-t)", (5.0, 1.0)), "support", ["lower end must be below"]),
    # Unknown family.
    ("unknown family", lambda: Target.family("weibul", shape=2.0, scale=1.0), "family", ["unknown family"]),
    # Histograms.
    ("negative count", lambda: Target.histogram([0, 10, 20], [3, -1]), "counts", ["negative"]),
    ("unsorted edges", lambda: Target.histogram([0, 20, 10], [3, 1]), "edges", ["must increase"]),
    ("counts and edges mismatched", lambda: Target.histogram([0, 10, 20], [1, 2, 3]), "counts",
     ["expected 2 counts"]),
    # Failure data.
    ("no failure data", lambda: Target.failures([]), "times", ["no data"]),
    ("negative failure time", lambda: Target.failures([5.0, -1.0]), "times", ["negative"]),
    ("all suspensions", lambda: Target.failures([5.0, 6.0], [True, True]), "censored", ["at least one failure"]),
    # Mixtures.
    ("weights not matching components", lambda: Target.mixture([weibull(), weibull()], [1.0]), "weights",
     ["1 weights for 2 components"]),
    ("negative weight", lambda: Target.mixture([weibull(), weibull()], [1.0, -0.5]), "weights", [">= 0"]),
    # Survival ages outside the support.
    ("age beyond the support", lambda: Target.histogram([0, 10, 20], [1, 1]).given_survival(25.0), "age",
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
        Target.family("weibull", shape=-1.0, scale=1.0)


def test_method_not_applicable_is_a_model_error():
    assert issubclass(MethodNotApplicable, ModelError)
    from engine.methods.inversion import NumericalInversion
    with pytest.raises(ModelError) as err:
        NumericalInversion.build(Target.failures([5.0, 8.0, 12.0]))
    assert isinstance(err.value, MethodNotApplicable)
    assert err.value.field == "method"


def test_engine_exposes_both_errors_at_the_top_level():
    assert engine.ModelError is ModelError
    assert engine.MethodNotApplicable is MethodNotApplicable
