"""The pictures reliability engineers read (dashboard.life_curves, through the page's state): the
hazard rate h(t), the cumulative hazard H(t) and the probability plot on Weibull scales, checked
against closed forms, and field data's own plotting positions against their textbook definitions.

References: Weibull h(t) = (b/eta)(t/eta)^(b-1) and H(t) = (t/eta)^b, and the Weibull plot
ln(-ln(1-F)) = b ln t - b ln eta, a straight line of slope b (NIST/SEMATECH e-Handbook 8.1.6.2
and 8.2.2.1); exponential hazard 1/mean (8.1.6.1); Benard's median ranks (i - 0.3)/(n + 0.4) and
Johnson's adjusted ranks for suspensions, increment (n + 1 - previous)/(1 + reverse rank)
(from memory of the reliability textbooks' worked method; the recurrence is applied literally here).
"""
import numpy as np
import pytest
from scipy import stats

from lifedraw.dashboard.life_curves import adjusted_ranks, line_fit, poisson_band, weibull_y
from lifedraw.dashboard.state import DrawingBoard

BETA, ETA = 2.6, 31000.0          # scenarios/gearbox-wearout.toml


@pytest.fixture(scope="module")
def gearbox():
    """200,000 Weibull draws (four batches of 50,000, seed of the scenario)."""
    board = DrawingBoard("gearbox-wearout", batch_size=50_000)
    for _ in range(3):
        board.step()
    assert board.n == 200_000
    return board


def weibull_h(t):
    return (BETA / ETA) * (t / ETA) ** (BETA - 1)


def test_the_model_hazard_is_the_weibull_closed_form(gearbox):
    d = gearbox.hazard_data()
    np.testing.assert_allclose(d["model_h"], weibull_h(d["model_x"]), rtol=1e-9)
    np.testing.assert_allclose(d["model_H"], (d["x"] / ETA) ** BETA, rtol=1e-9, atol=1e-15)


def test_the_hazard_estimate_from_the_draws_covers_the_closed_form(gearbox):
    # Each bin's exact Poisson 95 % band should hold the true h at the bin's middle in about 95 %
    # of the ~140 bins (binomial sd ~2 %); 85 % leaves room for chance and for the midpoint
    # standing in for the bin's average hazard, yet a 5 % error in eta drops it far lower.
    d = gearbox.hazard_data()
    truth = weibull_h(d["mid"])
    inside = (d["lower"] <= truth) & (truth <= d["upper"])
    assert d["mid"].size > 100
    assert inside.mean() >= 0.85
    # Pooled over bins the estimate is unbiased: failures-weighted mean ratio within 1 %.
    ratio = np.average(d["estimate"] / truth, weights=d["estimate"] * np.diff(gearbox.acc.edges)[0])
    assert ratio == pytest.approx(1.0, abs=0.01)


def test_a_wrong_model_falls_outside_the_hazard_band(gearbox):
    # The same check against a Weibull with eta 5 % smaller: the band must reject it (the test can fail).
    d = gearbox.hazard_data()
    wrong = (BETA / (0.95 * ETA)) * (d["mid"] / (0.95 * ETA)) ** (BETA - 1)
    assert ((d["lower"] <= wrong) & (wrong <= d["upper"])).mean() < 0.6


def test_the_cumulative_hazard_of_the_draws_follows_the_closed_form(gearbox):
    # Pointwise delta-method sd of -ln S_n; the largest deviation of a whole empirical curve
    # stays below ~3 sd (Kolmogorov's bound); 4.5 sd is the tolerance.
    d = gearbox.hazard_data()
    truth = (d["edges"] / ETA) ** BETA
    S = np.exp(-truth)
    sd = np.sqrt((1 - S) / (gearbox.n * S))
    inner = truth > 1e-3
    assert np.max(np.abs(d["H"] - truth)[inner] / sd[inner]) < 4.5


def test_log_axes_put_the_weibull_hazard_on_a_straight_line():
    board = DrawingBoard("gearbox-wearout", batch_size=10_000)
    board.hazard_log = True
    d = board.hazard_data()
    slope = np.polyfit(np.log(d["model_x"]), np.log(d["model_h"]), 1)[0]
    assert slope == pytest.approx(BETA - 1, rel=1e-9)
    assert np.all(np.diff(np.log(d["model_x"])) > 0)      # a geometric grid of ages


def test_the_exponential_hazard_is_constant():
    board = DrawingBoard("gearbox-wearout", batch_size=10_000)
    assert board.apply_family("exponential", "scale = 2000")
    d = board.hazard_data()
    np.testing.assert_allclose(d["model_h"], 1 / 2000, rtol=1e-9)


def test_the_weibull_plot_of_the_model_is_a_straight_line_of_slope_beta(gearbox):
    w = gearbox.weibull_data()
    slope, intercept = line_fit(w["model_t"], w["p"])
    assert slope == pytest.approx(BETA, rel=1e-8)
    assert intercept == pytest.approx(-BETA * np.log(ETA), rel=1e-8)


def test_the_weibull_plot_of_the_draws_has_slope_beta(gearbox):
    # Quantiles of a 200,000-draw reservoir between 0.1 % and 99.9 %: their least-squares slope
    # on Weibull scales scatters by well under 1 % here; 2 % is the tolerance.
    w = gearbox.weibull_data()
    slope, _ = line_fit(w["sample_t"], w["p"])
    assert slope == pytest.approx(BETA, rel=0.02)


def test_a_bathtub_mixture_bends_on_weibull_scales():
    w = DrawingBoard("sensor-bathtub", batch_size=10_000).weibull_data()
    t, y = w["model_t"], w["y"]
    slope, intercept = line_fit(t, w["p"])
    assert np.max(np.abs(y - (slope * np.log(t) + intercept))) > 0.5    # far from any straight line


def test_weibull_scale_is_log_of_minus_log_survival():
    p = np.array([0.01, 1 - np.exp(-1), 0.99])
    np.testing.assert_allclose(weibull_y(p), [np.log(-np.log(0.99)), 0.0, np.log(-np.log(0.01))])


def test_complete_data_gets_benard_median_ranks():
    t = np.array([30.0, 10.0, 20.0, 50.0, 40.0])
    times, F = adjusted_ranks(t, np.zeros(5, dtype=bool))
    np.testing.assert_array_equal(times, [10, 20, 30, 40, 50])
    np.testing.assert_allclose(F, (np.arange(1, 6) - 0.3) / 5.4)


def test_suspensions_get_johnson_adjusted_ranks():
    t = np.array([10.0, 15.0, 20.0, 25.0, 30.0, 40.0])
    c = np.array([False, True, False, True, False, False])
    times, F = adjusted_ranks(t, c)
    # The recurrence as the textbooks state it, one failure at a time.
    n, order, expected = t.size, 0.0, []
    for i in range(n):
        reverse_rank = n - i
        if not c[i]:
            order += (n + 1 - order) / (1 + reverse_rank)
            expected.append((order - 0.3) / (n + 0.4))
    np.testing.assert_array_equal(times, [10, 20, 30, 40])
    np.testing.assert_allclose(F, expected, rtol=1e-12)


def test_field_data_shows_its_own_points():
    board = DrawingBoard("hydro-gate-bushings", batch_size=10_000)
    field = board.weibull_data()["field"]
    target = board.target
    assert field["t"].size == int((~target.censored).sum())
    assert np.all(np.diff(field["F"]) > 0) and field["F"][-1] < 1
    assert "adjusted" in field["how"]
    binned = DrawingBoard("ebike-battery-returns", batch_size=10_000).weibull_data()["field"]
    assert binned is not None and np.all(np.diff(binned["F"]) > 0)


def test_the_poisson_band_is_garwoods():
    # Garwood (1936) 95 % limits for 10 events: 4.795 to 18.39 (published tables; scipy's chi2 here).
    lo, hi = poisson_band(np.array([10.0]))
    assert lo[0] == pytest.approx(stats.chi2.ppf(0.025, 20) / 2) == pytest.approx(4.795, abs=1e-3)
    assert hi[0] == pytest.approx(18.39, abs=1e-2)
