"""Specification of targets built from field data: binned counts and failure times with suspensions.

References: the NIST/SEMATECH e-Handbook 8.2.1.5 product-limit worked example, a textbook
product-limit computation written out here, scipy's censored Weibull fit, and closed forms.
"""
import math

import numpy as np
import pytest
from scipy import integrate, stats

import lifedraw
from lifedraw.engine import ModelError, Target, fit

EDGES = np.array([0.0, 100.0, 250.0, 400.0, 700.0, 1000.0])
COUNTS = np.array([12.0, 0.0, 30.0, 45.0, 13.0])         # bin 2 has no failures
SHARES = COUNTS / COUNTS.sum()
CUMULATIVE = np.concatenate([[0.0], np.cumsum(SHARES)])


def histogram(smooth=False, counts=COUNTS):
    return lifedraw.binned_counts(EDGES.tolist(), counts.tolist(), smooth=smooth)


# ---- histogram, uniform within bins ----------------------------------------------------

def test_histogram_cdf_is_piecewise_linear_through_the_cumulative_shares():
    t = np.linspace(-50.0, 1050.0, 11001)
    # Uniform within each bin: F is the linear interpolation of the cumulative shares.
    want = np.interp(t, EDGES, CUMULATIVE)
    assert np.max(np.abs(histogram().cdf(t) - want)) <= 1e-15


def test_histogram_density_is_share_over_width_in_each_bin():
    mids = 0.5 * (EDGES[:-1] + EDGES[1:])
    assert histogram().pdf(mids) == pytest.approx(SHARES / np.diff(EDGES), rel=1e-15)


def test_histogram_quantile_is_the_exact_inverse_of_its_cdf():
    target = histogram()
    u = np.linspace(0.0, 1.0, 100001)
    assert np.max(np.abs(target.cdf(target.quantile(u)) - u)) <= 2.3e-16
    # ...and the other way round inside bins with mass.
    t = np.concatenate([np.linspace(1.0, 99.0, 50), np.linspace(251.0, 999.0, 200)])
    assert target.quantile(target.cdf(t)) == pytest.approx(t, rel=1e-12)


def test_histogram_quantile_never_lands_inside_a_zero_count_bin():
    u = np.linspace(0.0, 1.0, 1_000_001)
    x = histogram().quantile(u)
    assert not np.any((x > EDGES[1]) & (x < EDGES[2]))


def test_histogram_draws_never_fall_inside_a_zero_count_bin():
    counts = np.array([0.0, 5.0, 0.0, 3.0, 0.0])                  # empty bins at both ends, too
    draws = fit(histogram(counts=counts), "inversion").sample(200_000, 11)
    for lo, hi, c in zip(EDGES[:-1], EDGES[1:], counts):
        if c == 0:
            assert not np.any((draws > lo) & (draws < hi)), (lo, hi)


def test_histogram_mean_and_variance_are_the_uniform_bin_closed_forms():
    a, b = EDGES[:-1], EDGES[1:]
    # Uniform on [a, b]: E[T] = (a + b)/2, E[T^2] = (a^2 + ab + b^2)/3.
    m1 = np.sum(SHARES * (a + b) / 2)
    m2 = np.sum(SHARES * (a * a + a * b + b * b) / 3)
    target = histogram()
    assert target.mean() == pytest.approx(m1, rel=1e-14)
    assert target.var() == pytest.approx(m2 - m1 * m1, rel=1e-12)


# ---- histogram, smooth (monotone cubic CDF through the cumulative shares) -------------------

SMOOTH_COUNTS = np.array([12.0, 3.0, 30.0, 45.0, 13.0])


def test_smooth_histogram_keeps_every_bins_share_exactly():
    for counts in (COUNTS, SMOOTH_COUNTS):
        target = histogram(smooth=True, counts=counts)
        cumulative = np.concatenate([[0.0], np.cumsum(counts / counts.sum())])
        assert np.max(np.abs(target.cdf(EDGES) - cumulative)) <= 1e-12


def test_smooth_histogram_density_integrates_to_each_bins_share():
    target = histogram(smooth=True, counts=SMOOTH_COUNTS)
    masses = [integrate.quad(lambda t: float(target.pdf(t)), lo, hi, epsabs=1e-14, epsrel=1e-12)[0]
              for lo, hi in zip(EDGES[:-1], EDGES[1:])]
    assert masses == pytest.approx((SMOOTH_COUNTS / SMOOTH_COUNTS.sum()).tolist(), rel=1e-10)


@pytest.mark.parametrize("counts", [SMOOTH_COUNTS, COUNTS], ids=["all bins filled", "an empty bin"])
def test_smooth_histogram_density_is_continuous_at_inner_edges(counts):
    target = histogram(smooth=True, counts=counts)
    inner = EDGES[1:-1]
    delta = 1e-7 * np.diff(EDGES).min()
    left, right = target.pdf(inner - delta), target.pdf(inner + delta)
    # A C1 cubic (Fritsch & Carlson 1980): f changes only by ~2·delta·f' ~ 1e-7 of its scale across
    # an edge (measured 2e-7), while the uniform-bin density jumps there by tens of percent.
    scale = np.max(target.pdf(np.linspace(1.0, 999.0, 999)))
    assert np.max(np.abs(left - right)) <= 1e-5 * scale


def test_smooth_histogram_density_is_non_negative_and_cdf_non_decreasing():
    target = histogram(smooth=True, counts=COUNTS)
    t = np.linspace(0.0, 1000.0, 200001)
    assert np.all(target.pdf(t) >= 0.0)
    assert np.all(np.diff(target.cdf(t)) >= 0.0)


def test_smooth_histogram_puts_no_mass_in_an_empty_bin():
    target = histogram(smooth=True, counts=COUNTS)
    assert np.all(target.pdf(np.linspace(100.5, 249.5, 300)) == 0.0)


# ---- product-limit (Kaplan & Meier 1958) ------------------------------------------------

# NIST/SEMATECH e-Handbook 8.2.1.5 worked example: 20 units on test; failures at 10, 32, 56,
# 98, 122 and 181 h; units removed at 50, 100, 125 and 150 h; 10 units still running at 200 h.
# The handbook page was not in the search index; the same data, with the numbers at risk
# n_i = 20, 19, 17, 16, 14, 11, are reproduced on accendoreliability.com ("Kaplan-Meier
# reliability estimator"). The published survival column is quoted from memory (3 decimals).
NIST_TIMES = [10, 32, 56, 98, 122, 181, 50, 100, 125, 150] + [200] * 10
NIST_CENSORED = [False] * 6 + [True] * 14
NIST_FAILURES = np.array([10.0, 32.0, 56.0, 98.0, 122.0, 181.0])
NIST_PUBLISHED_R = np.array([0.950, 0.900, 0.847, 0.794, 0.737, 0.670])


def textbook_product_limit(times, censored):
    """The product-limit estimate computed the way a textbook does it, one failure time at a time.

    At each distinct failure time t_j: n_j units at risk (all with time >= t_j, so a suspension
    tied with a failure still counts as at risk: Kaplan & Meier's convention, from memory),
    d_j failures; R(t_j) = R(t_{j-1})·(1 - d_j/n_j).
    """
    times, censored = np.asarray(times, float), np.asarray(censored, bool)
    out_t, out_r, r = [], [], 1.0
    for tj in sorted(set(times[~censored].tolist())):
        n_j = int(np.sum(times >= tj))
        d_j = int(np.sum((times == tj) & ~censored))
        r *= 1.0 - d_j / n_j
        out_t.append(tj)
        out_r.append(r)
    return np.array(out_t), np.array(out_r)


def nist_example():
    return lifedraw.failure_times(NIST_TIMES, NIST_CENSORED)


def test_product_limit_reproduces_the_nist_worked_example():
    target = nist_example()
    assert target.failure_times.tolist() == NIST_FAILURES.tolist()
    assert target.at_risk.tolist() == [20, 19, 17, 16, 14, 11]            # n_i (accendoreliability.com)
    assert np.max(np.abs(target.sf(NIST_FAILURES) - NIST_PUBLISHED_R)) <= 5e-4   # 3 published decimals


def test_product_limit_matches_the_textbook_computation():
    want_t, want_r = textbook_product_limit(NIST_TIMES, NIST_CENSORED)
    target = nist_example()
    assert target.sf(want_t) == pytest.approx(want_r, rel=1e-14)
    # A step function: R holds its value until the next failure time.
    assert target.sf(want_t[1:] - 1e-9) == pytest.approx(want_r[:-1], rel=1e-14)


def test_product_limit_counts_a_tied_suspension_as_still_at_risk():
    times = [3.0, 5.0, 5.0, 7.0, 9.0, 9.0, 12.0]
    censored = [False, False, True, False, True, False, True]
    want_t, want_r = textbook_product_limit(times, censored)
    # By hand: 6/7 at t=3; (5/6)·... at t=5 with n=6 (the suspension at 5 still at risk); n=4 at 7; n=3 at 9.
    assert want_r.tolist() == pytest.approx([6 / 7, 6 / 7 * 5 / 6, 6 / 7 * 5 / 6 * 3 / 4,
                                             6 / 7 * 5 / 6 * 3 / 4 * 2 / 3], rel=1e-15)
    assert lifedraw.failure_times(times, censored).sf(want_t) == pytest.approx(want_r, rel=1e-14)


def test_product_limit_quantile_is_the_smallest_failure_time_reaching_u():
    target = nist_example()
    want_t, want_r = textbook_product_limit(NIST_TIMES, NIST_CENSORED)
    F = 1.0 - want_r
    u = np.linspace(1e-6, F[-1] - 1e-9, 4001)
    # Generalised inverse F^-1(u) = min{t : F(t) >= u} of a step CDF.
    want = want_t[np.searchsorted(F, u - 1e-15, side="left")]
    assert target.quantile(u).tolist() == want.tolist()


def test_without_suspensions_the_product_limit_is_the_empirical_distribution():
    data = [5.0, 8.0, 8.0, 12.0, 20.0]
    target = lifedraw.failure_times(data)
    # Each observation carries 1/n (NIST e-Handbook 8.2.1.5: K-M reduces to the empirical CDF).
    assert target.cdf(np.array([4.9, 5.0, 8.0, 12.0, 19.9, 20.0])).tolist() == pytest.approx(
        [0.0, 0.2, 0.6, 0.8, 0.8, 1.0], abs=1e-15)
    assert target.mean() == pytest.approx(np.mean(data), rel=1e-15)
    assert target.support == (0.0, 20.0)
    assert "no unit is drawn beyond it" in target.describe()


def test_censored_last_observation_leaves_its_mass_to_a_tail_beyond_the_data():
    target = nist_example()
    tail = textbook_product_limit(NIST_TIMES, NIST_CENSORED)[1][-1]            # R(181) = 0.6704
    assert target.tail_mass == pytest.approx(tail, rel=1e-14)
    # No failure between the last failure and the last observation, then a continuous tail to infinity.
    assert target.sf(np.array([190.0, 200.0])) == pytest.approx([tail, tail], rel=1e-14)
    assert target.support[1] == math.inf
    atoms = sum(p for _, p in target.atom_masses())
    assert atoms + target.tail_mass == pytest.approx(1.0, rel=1e-15)
    u = np.array([1 - tail + 1e-9, 0.5, 0.99])
    assert np.all(target.quantile(u) > 200.0)


def test_tail_is_the_censored_weibull_fit_conditioned_on_survival_to_the_last_observation():
    target = nist_example()
    # Independent fit: scipy's maximum likelihood with right-censored data.
    data = stats.CensoredData.right_censored(np.array(NIST_TIMES, float), np.array(NIST_CENSORED))
    shape, _, scale = stats.weibull_min.fit(data, floc=0)
    # Both are optimiser results of the same likelihood: they agree to ~1e-8 (measured); 1e-6 allowed.
    assert target.tail_fit.params["shape"] == pytest.approx(shape, rel=1e-6)
    assert target.tail_fit.params["scale"] == pytest.approx(scale, rel=1e-6)
    ref = stats.weibull_min(shape, scale=scale)
    t = np.array([250.0, 400.0, 1000.0, 5000.0])
    want = target.tail_mass * ref.sf(t) / ref.sf(200.0)                        # R(181)·R_W(t)/R_W(200)
    assert target.sf(t) == pytest.approx(want, rel=1e-5)


def test_product_limit_mean_adds_the_atoms_and_the_tail():
    target = nist_example()
    want_t, want_r = textbook_product_limit(NIST_TIMES, NIST_CENSORED)
    masses = -np.diff(np.concatenate([[1.0], want_r]))
    data = stats.CensoredData.right_censored(np.array(NIST_TIMES, float), np.array(NIST_CENSORED))
    shape, _, scale = stats.weibull_min.fit(data, floc=0)
    ref = stats.weibull_min(shape, scale=scale)
    # E[T; T > 200] = R(181)·(200 + integral of R_W(200 + x)/R_W(200) dx).
    residual_mean = integrate.quad(lambda x: ref.sf(200.0 + x) / ref.sf(200.0), 0, np.inf, epsrel=1e-12)[0]
    want = np.sum(masses * want_t) + want_r[-1] * (200.0 + residual_mean)
    assert target.mean() == pytest.approx(want, rel=1e-5)   # the fit's optimiser tolerance dominates


def test_description_says_the_tail_is_an_extrapolation_with_its_share():
    text = nist_example().describe()
    assert "6 failures and 14 suspensions" in text
    assert "67.0%" in text and "Weibull tail" in text and "extrapolation" in text


# ---- bad field data --------------------------------------------------------------------------

@pytest.mark.parametrize("edges, counts, field, words", [
    ([0, 10, 20], [3, -1], "counts", "negative"),
    ([0, 20, 10], [3, 1], "edges", "increase"),
    ([0, 10, 10], [3, 1], "edges", "increase"),
    ([0, 10, 20], [3, 1, 2], "counts", "expected 2 counts"),
    ([0, 10, 20], [0, 0], "counts", "all counts are 0"),
    ([0, 10, float("nan")], [1, 2], "edges", "not a finite number"),
    ([0], [1], "edges", "at least two edges"),
], ids=["negative count", "unsorted edges", "repeated edge", "length mismatch", "all zero", "nan edge",
        "one edge"])
def test_bad_histogram_is_rejected_naming_the_field(edges, counts, field, words):
    with pytest.raises(ModelError) as err:
        lifedraw.binned_counts(edges, counts)
    assert err.value.field == field
    assert words in err.value.reason


@pytest.mark.parametrize("times, censored, field, words", [
    ([5.0, -2.0, 7.0], None, "times", "negative"),
    ([], None, "times", "no data"),
    ([5.0, 6.0, 7.0], [True, True, True], "censored", "at least one failure"),
    ([5.0, 6.0, 7.0], [True, False], "censored", "2 flags for 3 times"),
    ([5.0, float("inf")], None, "times", "not a finite number"),
], ids=["negative time", "empty", "all censored", "length mismatch", "infinite time"])
def test_bad_failure_data_is_rejected_naming_the_field(times, censored, field, words):
    with pytest.raises(ModelError) as err:
        lifedraw.failure_times(times, censored)
    assert err.value.field == field
    assert words in err.value.reason
