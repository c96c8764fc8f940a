"""Renamed public names keep working for one release, with a DeprecationWarning naming the new one."""
import math
import warnings

import numpy as np
import pytest
from scipy import stats

import lifedraw
from lifedraw import Target

OLD_TO_NEW = [
    ("family", ("weibull",), dict(shape=2.0, scale=100.0), "family"),
    ("density", ("exp(-t/10)",), {}, "density_formula"),
    ("hazard_rate", ("0.1 + 0*t",), {}, "hazard_formula"),
    ("hazard", ("0.1 + 0*t",), {}, "hazard_formula"),
    ("cdf_formula", ("1 - exp(-t/10)",), {}, "cdf_formula"),
    ("histogram", ([0.0, 1.0, 2.0], [3, 1]), {}, "binned_counts"),
    ("failures", ([1.0, 2.0, 3.0, 4.0],), {}, "failure_times"),
]


@pytest.mark.parametrize("old, args, kwargs, new", OLD_TO_NEW, ids=[c[0] for c in OLD_TO_NEW])
def test_an_old_constructor_warns_and_builds_the_same_model(old, args, kwargs, new):
    with pytest.warns(DeprecationWarning, match=f"lifedraw.{new}"):
        model = getattr(Target, old)(*args, **kwargs)
    same = getattr(lifedraw, new)(*args, **kwargs)
    t = np.linspace(0.1, 3.0, 7)
    np.testing.assert_allclose(model.cdf(t), same.cdf(t), rtol=1e-12)


def test_hazard_on_an_instance_is_still_h_of_t_without_a_warning():
    # Reference: exponential with mean 10 has the constant hazard 1/10 (closed form).
    model = lifedraw.family("exponential", scale=10.0)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        np.testing.assert_allclose(model.hazard(np.array([1.0, 50.0])), [0.1, 0.1], rtol=1e-12)


def test_old_mixture_and_competing_constructors_warn():
    parts = [lifedraw.family("exponential", scale=10.0), lifedraw.family("exponential", scale=40.0)]
    with pytest.warns(DeprecationWarning, match="lifedraw.mixture"):
        mix = Target.mixture(parts, [0.5, 0.5])
    with pytest.warns(DeprecationWarning, match="lifedraw.competing"):
        race = Target.competing(parts)
    # References: a mixture's survival is the weighted sum; independent exponential modes race to an
    # exponential with the summed rate 1/10 + 1/40 (closed forms; scipy.stats.expon for the values).
    assert math.isclose(mix.sf(5.0), 0.5 * stats.expon.sf(5.0, scale=10) + 0.5 * stats.expon.sf(5.0, scale=40),
                        rel_tol=1e-12)
    assert math.isclose(race.sf(5.0), stats.expon.sf(5.0, scale=1 / (1 / 10 + 1 / 40)), rel_tol=1e-12)
