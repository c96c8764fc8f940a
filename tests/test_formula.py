"""Specification of engine.formula, the safe formula language for lifetime models.

References: the same expression written directly in numpy/scipy, scipy.stats.weibull_min,
central finite differences, and closed-form derivatives from the NIST DLMF.
"""
import warnings

import numpy as np
import pytest
from scipy import special, stats

from lifedraw.engine.errors import ModelError
from lifedraw.engine.formula import Formula

T = np.array([0.5, 1.0, 3.0, 10.0, 49.0, 50.0, 99.0, 100.0, 150.0, 250.0])


# --- Evaluation ------------------------------------------------------------------------------

# Each formula against the same expression written directly in numpy/scipy.
EVALUATION_CASES = [
    ("2*t + 1", {}, lambda t: 2 * t + 1),
    ("0.3*exp(-t/50) + when(t < 100, 0, 1e-3)", {},
     lambda t: 0.3 * np.exp(-t / 50) + np.where(t < 100, 0, 1e-3)),
    ("a*t + b", {"a": 2.0, "b": -3.0}, lambda t: 2 * t - 3),
    ("-t**2", {}, lambda t: -(t**2)),                      # unary minus binds looser than **
    ("t**0.5/2", {}, lambda t: np.sqrt(t) / 2),
    ("log(t) + log1p(t) - expm1(-t/100)", {},
     lambda t: np.log(t) + np.log1p(t) - np.expm1(-t / 100)),
    ("sqrt(t)*sin(t) + cos(t) - tan(t/400)", {},
     lambda t: np.sqrt(t) * np.sin(t) + np.cos(t) - np.tan(t / 400)),
    ("asin(t/300) + acos(t/300) + atan(t)", {},
     lambda t: np.arcsin(t / 300) + np.arccos(t / 300) + np.arctan(t)),
    ("sinh(t/100)*cosh(t/100) - tanh(t/10)", {},
     lambda t: np.sinh(t / 100) * np.cosh(t / 100) - np.tanh(t / 10)),
    ("erf(t/10) - erfc(t/20)", {}, lambda t: special.erf(t / 10) - special.erfc(t / 20)),
    ("gamma(1 + 1/t) + lgamma(t)", {}, lambda t: special.gamma(1 + 1 / t) + special.gammaln(t)),
    ("digamma(t) + polygamma(2, t)", {}, lambda t: special.digamma(t) + special.polygamma(2, t)),
    ("abs(50 - t)", {}, lambda t: np.abs(50 - t)),
    ("min(t, 50, 200 - t) + max(t, 10)", {},
     lambda t: np.minimum(np.minimum(t, 50), 200 - t) + np.maximum(t, 10)),
    ("pi*e*t", {}, lambda t: np.pi * np.e * t),
    ("when(10 < t <= 100, 1, 0)", {}, lambda t: np.where((10 < t) & (t <= 100), 1.0, 0.0)),
    # Python precedence: `or` is looser than `and`, which is looser than `not`.
    ("when(t < 10 or t > 100 and not t == 150, t, -t)", {},
     lambda t: np.where((t < 10) | ((t > 100) & ~(t == 150)), t, -t)),
    ("when(t != 50 and t >= 3, 1, 2)", {}, lambda t: np.where((t != 50) & (t >= 3), 1.0, 2.0)),
    ("t if t < 50 else 100 - t", {}, lambda t: np.where(t < 50, t, 100 - t)),
]


@pytest.mark.parametrize("text, params, reference", EVALUATION_CASES,
                         ids=[c[0] for c in EVALUATION_CASES])
def test_evaluation_matches_the_numpy_expression(text, params, reference):
    f = Formula.parse(text, params=tuple(params))
    # Same operations in the same order: agreement to a few ulps.
    np.testing.assert_allclose(f(T, **params), reference(T), rtol=1e-13, atol=0)


def test_caret_is_power_with_power_precedence():
    # Python reads ^ as xor, looser than +; the language reads it as **.
    f = Formula.parse("2*t^2 + 1")
    np.testing.assert_allclose(f(T), 2 * T**2 + 1, rtol=1e-15)


def test_power_is_right_associative_for_both_spellings():
    # Python Language Reference §6.5: 2**3**2 == 2**(3**2) == 512.
    assert Formula.parse("2^3^t")(2.0) == 512.0
    assert Formula.parse("2**3**t")(2.0) == 512.0


def test_weibull_density_formula_matches_scipy():
    # Reference: scipy.stats.weibull_min, pdf c x^(c-1) exp(-x^c) with x = t/scale.
    f = Formula.parse("beta/eta * (t/eta)**(beta-1) * exp(-(t/eta)**beta)", ("beta", "eta"))
    np.testing.assert_allclose(f(T, beta=1.7, eta=80.0),
                               stats.weibull_min.pdf(T, c=1.7, scale=80.0), rtol=1e-12)


def test_bind_fixes_parameter_values():
    f = Formula.parse("beta/eta * (t/eta)**(beta-1)", ("beta", "eta"))
    bound = f.bind(beta=2.5, eta=30.0)
    np.testing.assert_array_equal(bound(T), f(T, beta=2.5, eta=30.0))


# --- Shapes and values -----------------------------------------------------------------------

@pytest.mark.parametrize("t", [7.0, np.linspace(1, 2, 5), np.ones((3, 4))],
                         ids=["scalar", "1-D", "2-D"])
@pytest.mark.parametrize("text", ["t**2", "2", "beta", "when(t < 1.5, 1, t)"])
def test_result_has_the_shape_of_t(t, text):
    out = Formula.parse(text, ("beta",))(t, beta=3.0)
    assert isinstance(out, np.ndarray) and out.dtype == np.float64
    assert out.shape == np.shape(t)


def test_constant_formula_fills_the_shape_of_t():
    np.testing.assert_array_equal(Formula.parse("2")(np.zeros((2, 3))), np.full((2, 3), 2.0))


def test_result_never_aliases_the_callers_array():
    t = np.array([1.0, 2.0])
    out = Formula.parse("t")(t)
    out[0] = 99.0
    assert t[0] == 1.0


def test_nan_and_inf_come_back_as_values_without_warnings():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        log_of_negative = Formula.parse("log(t)")(-1.0)
        one_over_zero = Formula.parse("1/t")(0.0)
    assert np.isnan(log_of_negative) and one_over_zero == np.inf


def test_names_and_uses_t():
    f = Formula.parse("beta*exp(-t)", ("beta", "eta"))
    assert f.names() == {"beta"} and f.uses_t()
    g = Formula.parse("eta*2 + pi", ("beta", "eta"))
    assert g.names() == {"eta"} and not g.uses_t()


# --- Rejections ------------------------------------------------------------------------------

REJECTED = [
    ("__import__('os').system('ls')", "only the named functions can be called"),
    ("__import__('os')", "unknown function '__import__'"),
    ("t.__class__", "attribute access"),
    ("().__class__.__bases__", "attribute access"),
    ("open('x')", "unknown function 'open'"),
    ("[t for t in x]", "comprehensions"),
    ("lambda: 1", "lambda"),
    ('"abc"', "strings"),
    ("t[0]", "indexing"),
    ("(t := 1)", "assignments"),
    ("f'{t}'", "f-strings"),
    ("{t: 1}", "dicts"),
    ("exp(x=t)", "keyword"),
    ("exp(*t)", "starred"),
    ("x + 1", "unknown name 'x' (known: t, pi, e, beta; functions: exp, log"),
    ("foo(t)", "unknown function 'foo' (functions: exp, log"),
    ("beta(t)", "'beta' is not a function"),
    ("exp + 1", "'exp' is a function"),
    ("exp(t, 2)", "exp() takes 1 argument, got 2"),
    ("when(t < 1, 2)", "when() takes 3 arguments"),
    ("max(t)", "max() takes at least 2 arguments, got 1"),
    ("polygamma(t, 1)", "n must be a whole number"),
    ("t % 2", "operator '%' is not supported"),
    ("~t", "operator '~' is not supported"),
    ("when(t in t, 1, 0)", "operator 'in' is not supported"),
    ("1j*t", "only real numbers"),
    ("True", "only real numbers"),
    ("t < 1", "is a condition"),
    ("when(t, 1, 2)", "a condition must be a comparison"),
    ("1" * 400, "too large"),                 # a whole number beyond float range
]


@pytest.mark.parametrize("text, message", REJECTED, ids=[r[0][:30] for r in REJECTED])
def test_unsafe_or_unknown_text_is_rejected_with_a_reason(text, message):
    with pytest.raises(ModelError) as info:
        Formula.parse(text, ("beta",))
    assert info.value.field == "formula"
    assert message in info.value.reason


def test_syntax_error_names_the_column_with_a_caret():
    with pytest.raises(ModelError) as info:
        Formula.parse("2*t + * 3")
    assert "column 7" in info.value.reason
    assert info.value.reason.endswith("  2*t + * 3\n        ^")


def test_error_columns_count_the_text_as_typed_with_carets():
    # "^" is rewritten to "**" before parsing; the column must still refer to the user's text.
    with pytest.raises(ModelError, match="column 7"):
        Formula.parse("t^2 + * 3")


def test_error_reports_the_callers_field_name():
    with pytest.raises(ModelError) as info:
        Formula.parse("x", field="hazard")
    assert info.value.field == "hazard" and str(info.value).startswith("hazard: ")


@pytest.mark.parametrize("text", ["", "   ", "\n"])
def test_empty_formula_is_rejected(text):
    with pytest.raises(ModelError, match="empty"):
        Formula.parse(text)


def test_text_over_2000_characters_is_rejected():
    with pytest.raises(ModelError, match="2000"):
        Formula.parse("t" + " + t" * 500)


@pytest.mark.parametrize("text", ["-" * 150 + "t", "exp(" * 120 + "t" + ")" * 120,
                                  "(" * 300 + "t" + ")" * 300],
                         ids=["unary chain", "nested calls", "parentheses"])
def test_too_deep_nesting_is_a_model_error_not_a_recursion_error(text):
    with pytest.raises(ModelError, match="nests more than 100 levels"):
        Formula.parse(text)


def test_a_long_flat_sum_is_not_nesting():
    # Issue 14: a flat sum of 151 terms was refused as "nested more than 100 levels".
    assert Formula.parse("t" + "+t" * 150)(2.0) == 302.0


def test_moderate_nesting_is_accepted():
    assert Formula.parse("exp(" * 40 + "-t" + ")" * 40)(1.0) > 0


@pytest.mark.parametrize("params, message", [
    (("2x",), "not a valid name"), (("beta eta",), "not a valid name"),
    (("lambda",), "not a valid name"), ((3,), "not a valid name"),
    (("t",), "reserved"), (("pi",), "reserved"), (("e",), "reserved"),
    (("exp",), "reserved"), (("when",), "reserved"), (("beta", "beta"), "twice"),
    ("beta", "list of names"),
])
def test_bad_parameter_names_are_rejected(params, message):
    with pytest.raises(ModelError, match=message):
        Formula.parse("t", params)


def test_missing_parameter_value_names_the_parameter():
    f = Formula.parse("beta*t", ("beta", "eta"))
    with pytest.raises(ModelError, match="missing value for parameter 'eta'"):
        f(T, beta=1.0)
    with pytest.raises(ModelError, match="missing value for parameter 'eta'"):
        f.bind(beta=1.0)


def test_unexpected_parameter_value_names_the_parameter():
    with pytest.raises(ModelError, match="unexpected parameter 'eta'"):
        Formula.parse("beta*t", ("beta",))(T, beta=1.0, eta=2.0)


def test_non_numeric_parameter_value_is_rejected():
    with pytest.raises(ModelError, match="parameter 'beta' must be a number"):
        Formula.parse("beta*t", ("beta",))(T, beta="big")


# --- Derivatives -----------------------------------------------------------------------------

# Points chosen away from the kinks of abs/min/max/when (at 1, 1.5, 2) and inside every domain.
D_POINTS = np.array([0.3, 0.7, 1.2, 2.6])
DERIVATIVE_CASES = [
    "t + t**2", "t - 3*t**2", "-t**3", "+t", "t*sin(t)", "sin(t)/(1 + t)", "7 + 0*t",
    "t**3", "t**-2", "t**2.5", "2**t", "t**t", "t^t", "(1 + t)**(t/2)", "a*t**a",
    "beta/eta*(t/eta)**(beta - 1)", "pi*e*t",
    "exp(0.3*t)", "log(t**2 + 1)", "log1p(t/3)", "expm1(t/4)", "sqrt(t + 1)",
    "sin(2*t)", "cos(t**2)", "tan(t/3)", "asin(t/4)", "acos(t/4)", "atan(t*t)",
    "sinh(t/2)", "cosh(t/2)", "tanh(t)", "erf(t/2)", "erfc(t/2)",
    "gamma(t + 0.5)", "lgamma(t + 0.5)", "digamma(t + 0.5)", "polygamma(2, t + 1)",
    "abs(t - 1.5)", "abs(1.5 - t)", "min(t, 2, 3 - t)", "max(t**2, 1, t)",
    "when(t < 1, t**2, 2*t - 1)", "t**2 if t > 1 else exp(t)",
]
PARAMS = {"a": 1.3, "beta": 1.7, "eta": 2.0}


@pytest.mark.parametrize("text", DERIVATIVE_CASES)
def test_derivative_matches_central_finite_difference(text):
    f = Formula.parse(text, tuple(PARAMS))
    df = f.derivative()
    h = 1e-6
    fd = (f(D_POINTS + h, **PARAMS) - f(D_POINTS - h, **PARAMS)) / (2 * h)
    # Central difference: truncation ~h^2 f'''/6 ~ 1e-12, rounding ~ eps|f|/h ~ 1e-10;
    # a wrong rule is off by O(1), so 1e-6 relative separates the two by far.
    np.testing.assert_allclose(df(D_POINTS, **PARAMS), fd, rtol=1e-6, atol=1e-8)


@pytest.mark.parametrize("text", DERIVATIVE_CASES)
def test_derivative_text_parses_back_to_the_same_function(text):
    df = Formula.parse(text, tuple(PARAMS)).derivative()
    again = Formula.parse(df.pretty(), tuple(PARAMS))
    np.testing.assert_array_equal(again(D_POINTS, **PARAMS), df(D_POINTS, **PARAMS))


def test_derivative_of_weibull_cdf_is_the_scipy_density():
    # Reference: scipy.stats.weibull_min.pdf; F(t) = 1 - exp(-(t/eta)^beta).
    F = Formula.parse("1 - exp(-(t/eta)**beta)", ("beta", "eta"))
    np.testing.assert_allclose(F.derivative()(T, beta=1.7, eta=80.0),
                               stats.weibull_min.pdf(T, c=1.7, scale=80.0), rtol=1e-12)


def test_second_derivative_of_lgamma_is_trigamma():
    # DLMF 5.15.1: psi^(1) = d^2 ln Gamma / dx^2; reference scipy.special.polygamma(1, x).
    d2 = Formula.parse("lgamma(t)").derivative().derivative()
    np.testing.assert_allclose(d2(T), special.polygamma(1, T), rtol=1e-13)


def test_derivative_of_gamma_is_gamma_times_digamma():
    # DLMF 5.2.2: psi = Gamma'/Gamma; reference scipy.special.gamma and digamma.
    np.testing.assert_allclose(Formula.parse("gamma(t)").derivative()(D_POINTS),
                               special.gamma(D_POINTS) * special.digamma(D_POINTS), rtol=1e-13)


def test_derivative_of_erf_is_the_gaussian_kernel():
    # DLMF 7.2.1: erf x = 2/sqrt(pi) * integral_0^x exp(-u^2) du.
    np.testing.assert_allclose(Formula.parse("erf(t)").derivative()(D_POINTS),
                               2 / np.sqrt(np.pi) * np.exp(-D_POINTS**2), rtol=1e-14)


@pytest.mark.parametrize("text, expected", [
    ("t**2", "2*t"),                  # n*u**(n-1)*u' with 2-1 folded, 1*x dropped
    ("1*t + 0*t**3 + 5", "1"),        # 0*x, 1*x and x + 0 vanish
    ("beta*2", "0"),
])
def test_derivative_is_trivially_simplified(text, expected):
    assert Formula.parse(text, ("beta",)).derivative().pretty() == expected


def test_derivative_keeps_parameters_and_field():
    d = Formula.parse("beta*t**2", ("beta", "eta"), field="hazard").derivative()
    assert d.params == ("beta", "eta") and d.field == "hazard" and d.names() == {"beta"}


# --- Printing --------------------------------------------------------------------------------

@pytest.mark.parametrize("text, canonical", [
    ("((t)) + ((1))", "t + 1"),
    ("(a*t)*t", "a*t*t"),
    ("a*(t*t)", "a*(t*t)"),                       # kept: a different rounding order
    ("a - (t - 1)", "a - (t - 1)"),
    ("a/(t/2)", "a/(t/2)"),
    ("-(t**2)", "-t**2"),
    ("(-t)**2", "(-t)**2"),
    ("(2**3)**t", "(2**3)**t"),
    ("2**(3**t)", "2**3**t"),
    ("2**(-t)", "2**-t"),
    ("t^2", "t**2"),
    ("t if t < 1 else 1", "when(t < 1, t, 1)"),
    ("when((not (t < 1)) and (t > 0 or t < -1), 1, 0)", "when(not t < 1 and (t > 0 or t < -1), 1, 0)"),
])
def test_pretty_uses_minimal_parentheses(text, canonical):
    assert Formula.parse(text, ("a",)).pretty() == canonical


def _random_text(rng, depth):
    """A fully parenthesised random expression: its tree is unambiguous."""
    if depth == 0 or rng.random() < 0.2:
        return str(rng.choice(["t", "a", "2", "0.5", "(-1.5)", "pi", "3e-2"]))
    x = lambda: _random_text(rng, depth - 1)  # noqa: E731
    kind = rng.integers(6)
    if kind == 0:
        return f"-({x()})"
    if kind == 1:
        return f"({x()}) {rng.choice(['+', '-', '*', '/', '**', '^'])} ({x()})"
    if kind == 2:
        return f"{rng.choice(['sin', 'atan', 'abs', 'sqrt', 'exp'])}({x()})"
    if kind == 3:
        return f"{rng.choice(['min', 'max'])}({x()}, {x()}, {x()})"
    if kind == 4:
        return f"when((({x()}) < ({x()})) {rng.choice(['and', 'or'])} (not ({x()}) >= 1), {x()}, {x()})"
    return f"({x()}) if (({x()}) <= ({x()}) != ({x()})) else ({x()})"


def test_pretty_round_trips_random_expressions():
    rng = np.random.default_rng(20240501)
    t = np.linspace(-3, 3, 13)
    for _ in range(400):
        f = Formula.parse(_random_text(rng, 4), ("a",))
        again = Formula.parse(f.pretty(), ("a",))
        assert again.pretty() == f.pretty()
        # Same tree means the same operations in the same order: bit-for-bit equal values.
        assert np.array_equal(again(t, a=0.7), f(t, a=0.7), equal_nan=True), f.text
