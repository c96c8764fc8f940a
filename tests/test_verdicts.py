"""Verdicts that never cry wolf: ✓/✗ beside intervals robust to rounding at 0 and 1, one
line saying what every verdict means (page, report, CLI), and a u-error line that says
whether its figures are bounds or estimates.

References: the Wilson (1927) score interval's closed-form ends at 0 and n successes;
the product-limit estimate (Kaplan & Meier 1958), which is exactly 1 before the first
failure; IEEE 754 double spacing (numpy.spacing); scipy.stats.gamma's cdf for an
independent u-error measurement (Derflinger, Hörmann & Leydold 2010 define the u-error).
"""
import math

import numpy as np
import pytest
from scipy import stats

import lifedraw
from lifedraw.cli.main import main
from lifedraw.dashboard.html_tables import life_table
from lifedraw.engine.check import U_GRID_SIZE, check, u_grid
from lifedraw.engine.life import (exact_life_figures, format_life_figures, inside_interval, life_summary,
                                  verdict_legend)

Z95 = stats.norm.ppf(0.975)


# ---- Wilson ends are exact at 0 and 1 ----------------------------------------------------------

@pytest.mark.parametrize("n", [40, 999, 123_457])
def test_when_every_unit_survives_the_upper_end_is_exactly_one(n):
    # Wilson (1927) at p_hat = 1: [n/(n + z^2), 1], closed form.
    row = life_summary(np.full(n, 10.0), mission_times=[5.0])["reliability"][0]
    assert row["upper"] == 1.0
    assert row["lower"] == pytest.approx(n / (n + Z95**2), rel=1e-12)


@pytest.mark.parametrize("n", [40, 999, 123_457])
def test_when_no_unit_survives_the_lower_end_is_exactly_zero(n):
    # Wilson (1927) at p_hat = 0: [0, z^2/(n + z^2)], closed form.
    row = life_summary(np.full(n, 1.0), mission_times=[5.0])["reliability"][0]
    assert row["lower"] == 0.0
    assert row["upper"] == pytest.approx(Z95**2 / (n + Z95**2), rel=1e-12)


# ---- the comparison allows a few ulps and no more -----------------------------------------------

def test_an_end_one_ulp_below_one_still_contains_one():
    # 0.9999999999999999 is 1 - 2^-53, one spacing below 1.0 (IEEE 754 binary64).
    assert 1.0 - 2.0**-53 == 0.9999999999999999
    assert inside_interval(1.0, 0.99992, 0.9999999999999999)


def test_an_end_a_rounding_above_zero_still_contains_zero():
    # centre - half with centre, half ~ 1.5e-4 rounds to within eps·1.5e-4 = 3e-20 of the
    # true end; 4 ulps of the upper end 3e-4 are 2.7e-19.
    assert inside_interval(0.0, 3e-20, 3e-4)
    assert not inside_interval(0.0, 1e-18, 3e-4)


@pytest.mark.parametrize("value", [1.0 + 1e-12, 0.999 - 1e-12, 1e-20])
def test_a_real_miss_is_still_a_miss(value):
    # 1e-12 is thousands of ulps at 1 (spacing 2.2e-16); 1e-20 is below [1e-17, 1e-16].
    lower, upper = (0.999, 1.0) if value > 1e-3 else (1e-17, 1e-16)
    assert not inside_interval(value, lower, upper)


def test_the_slack_is_relative_to_the_numbers_compared():
    # At B-life scale (6.28 hours) 4 ulps are 4·spacing(6.28) = 3.6e-15.
    upper = 6.28
    assert inside_interval(upper + 2 * np.spacing(upper), 6.0, upper)
    assert not inside_interval(upper + 10 * np.spacing(upper), 6.0, upper)


def test_missing_or_nan_figures_give_no_verdict():
    assert inside_interval(None, 0.0, 1.0) is None
    assert inside_interval(0.5, math.nan, 1.0) is None


def test_uploaded_data_whose_reliability_is_one_is_not_marked_wrong():
    # Failures only after 365 days: the product-limit R(365) is exactly 1 (Kaplan & Meier 1958).
    times = np.array([400.0, 520.0, 610.0, 700.0, 880.0, 950.0, 1100.0, 1300.0])
    model = lifedraw.failure_times(times, np.zeros(times.size, dtype=bool))
    x = lifedraw.fit(model).sample(50_000, rng=3)
    sample = life_summary(x, mission_times=[365.0])
    exact = exact_life_figures(model, mission_times=[365.0])
    assert exact["reliability"][0]["value"] == 1.0
    html = life_table({"sample": sample, "exact": exact}, "days")
    r_row = html.split("R(365 days)")[1].split("</tr>")[0]
    assert "✓" in r_row and "✗" not in r_row


# ---- one line says what a verdict means --------------------------------------------------------

def test_the_life_table_says_what_a_cross_means_and_how_often_it_appears():
    x = lifedraw.fit(lifedraw.family("weibull", shape=1.8, scale=1200)).sample(5_000, rng=1)
    target = lifedraw.family("weibull", shape=1.8, scale=1200)
    html = life_table({"sample": life_summary(x, [500.0]), "exact": exact_life_figures(target, [500.0])}, "h")
    assert "1 row in 20" in html and "✗" in verdict_legend(0.95)
    assert "1 row in 100" in verdict_legend(0.99)


def test_cli_check_says_what_reject_means_and_that_u_errors_are_estimates(capsys):
    assert main(["check", "streetlight-driver-hazard", "-n", "20000"]) == 0
    out = capsys.readouterr().out
    assert "about 1 time in 1,000" in out
    assert "estimates (maxima over test points), not bounds" in out
    assert f"maximum over {U_GRID_SIZE:,} other points" in out


def test_the_re_measured_u_error_is_what_scipy_measures_on_the_same_points():
    # The check's figure is |u - F(Q(u))| on u_grid(); measured again here with scipy.stats.gamma's
    # cdf/sf on the sampler's own Q, it must agree to rounding (1e-14 absolute), and stay within
    # the tolerance the sampler was built to.
    model = lifedraw.density_formula("t**(k-1)*exp(-t/th)", (0.0, math.inf), dict(k=3.5, th=20.0))
    sampler = lifedraw.fit(model, "inversion", tolerance=1e-10)
    report = check(sampler, n=20_000)
    u = u_grid()
    x = sampler.quantile(u)
    ref = stats.gamma(3.5, scale=20.0)
    scipy_error = np.max(np.where(u < 0.5, np.abs(u - ref.cdf(x)), np.abs((1.0 - u) - ref.sf(x))))
    assert report.u_error_measured == pytest.approx(scipy_error, abs=1e-14)
    assert report.u_error_measured <= 1e-10 and report.u_error <= 1e-10


def test_the_text_table_marks_each_row_and_carries_the_legend():
    # Weibull closed forms (NIST/SEMATECH e-Handbook 8.1.6.2) as the exact values; one of
    # them moved far outside its interval must turn its row, and only its row, to ✗.
    target = lifedraw.family("weibull", shape=1.8, scale=1200)
    x = 1200 * np.random.default_rng(7).weibull(1.8, 20_000)
    figures = life_summary(x, [500.0])
    exact = {"mttf": {"value": 1200 * math.gamma(1 + 1 / 1.8)},
             "b_lives": {n: {"p": p, "value": 1200 * (-math.log1p(-p)) ** (1 / 1.8)}
                         for n, p in (("B1", 0.01), ("B10", 0.10), ("B50", 0.50))},
             "reliability": [{"time": 500.0, "value": math.exp(-(500 / 1200) ** 1.8)}]}
    exact["b_lives"]["B50"]["value"] *= 1.5
    text = format_life_figures(figures, exact, unit="h")
    rows = {line.split()[0]: line for line in text.splitlines()[1:6]}
    assert rows["B50"].endswith("✗")
    assert all(rows[k].endswith("✓") for k in ("MTTF", "B1", "B10", "R(500"))
    assert verdict_legend(0.95) in text and "exact order statistics" in text
    assert exact_life_figures(target, [500.0])["b_lives"]["B10"]["value"] == pytest.approx(
        exact["b_lives"]["B10"]["value"], rel=1e-12)
