"""Specifications for engine.warranty: free-replacement warranty claims per calendar period.

References: for exponential lives claims form a Poisson process of rate 1/theta during cover
(Blischke & Murthy 1994, Warranty Cost Analysis, ch. 5; M(t) = t/theta, Cox 1962), so expected
claims per period are sales x (time under cover in that period) / theta; for a Weibull law the
simulated mean claims per period lie within their Monte Carlo interval of the exact expectation.
"""
import numpy as np
import pytest

import lifedraw
from lifedraw.engine.errors import ModelError

SALES = [120, 300, 0, 250]


def test_exponential_claims_are_time_under_cover_over_theta():
    theta, warranty, period = 40.0, 15.0, 6.0
    result = lifedraw.warranty_claims(lifedraw.family("exponential", scale=theta), SALES, warranty, period,
                                      runs=50, seed=1)
    expected = np.zeros(len(SALES) + 2)     # cover of 15 spans 3 periods of 6 after the sale
    for i, sold in enumerate(SALES):
        for k in range(expected.size):
            start, end = max(k * period, i * period), min((k + 1) * period, i * period + warranty)
            expected[k] += sold * max(end - start, 0.0) / theta
    np.testing.assert_allclose(result["expected"], expected, rtol=1e-9, atol=1e-12)


def test_weibull_simulated_claims_meet_the_exact_expectation():
    result = lifedraw.warranty_claims(lifedraw.family("weibull", shape=1.4, scale=30.0), SALES, 24.0, 6.0,
                                      runs=400, seed=3)
    # Each period's Monte Carlo mean within its 99.9% normal interval (7 periods, fixed seed).
    half = (result["mean_high"] - result["mean"]) * 3.29 / 1.96
    assert np.all(np.abs(result["mean"] - result["expected"]) <= half + 1e-12)
    assert result["simulated"].shape == (400, len(SALES) + 3)
    assert result["total_expected"] == pytest.approx(result["expected"].sum())


def test_claims_of_failure_records_meet_the_exact_expectation():
    records = lifedraw.failure_times([3.0, 7.0, 8.0, 12.0, 20.0, 26.0], [0, 0, 0, 1, 0, 1])
    result = lifedraw.warranty_claims(records, [100, 100], 12.0, 4.0, runs=300, seed=2)
    half = (result["mean_high"] - result["mean"]) * 3.29 / 1.96
    assert np.all(np.abs(result["mean"] - result["expected"]) <= half + 1e-9)


@pytest.mark.parametrize("kwargs, field", [
    (dict(sales=[10, -1]), "sales"), (dict(sales=[1.5]), "sales"), (dict(sales=[0, 0]), "sales"),
    (dict(sales="many"), "sales"), (dict(warranty=0.0), "warranty"), (dict(period=-2.0), "period"),
    (dict(runs=1), "runs"),
])
def test_bad_input_is_named(kwargs, field):
    args = dict(sales=[10, 20], warranty=12.0, period=3.0, runs=20)
    args.update(kwargs)
    with pytest.raises(ModelError) as err:
        lifedraw.warranty_claims(lifedraw.family("weibull", shape=2.0, scale=10.0), args.pop("sales"),
                                 args.pop("warranty"), args.pop("period"), **args)
    assert err.value.field == field
