"""Specifications for engine.check: goodness-of-fit evidence for a sampler.

References are scipy.stats, published constants and Monte Carlo with fixed seeds.
"""
import json

import numpy as np
import pytest
from scipy import integrate, stats

from lifedraw.engine.check import (CheckReport, anderson_darling_pvalue, anderson_darling_statistic,
                          check, measure_u_error)
from lifedraw.engine.errors import ModelError

from scipy_target import ScipyTarget

SEED = 20261201


class AtomsTarget(ScipyTarget):
    """A purely discrete lifetime law (as a product-limit estimate would give), via scipy's rv_discrete."""

    def __init__(self, points, masses):
        super().__init__(stats.rv_discrete(values=(points, masses)))
        self.atoms = np.asarray(points, dtype=float)

    def pdf(self, t):
        return np.zeros_like(np.asarray(t, dtype=float))

    def describe(self):
        return f"atoms at {self.atoms.tolist()}"


class Sampler:
    """A minimal sampler: draws through a frozen scipy law, optionally an inversion sampler."""

    def __init__(self, target, quantile=None, u_error=None):
        self.target = target
        self.stats = {"method": "reference"}
        if u_error is not None:
            self.stats["u_error"] = u_error
        if quantile is not None:
            self.quantile = quantile

    def sample(self, n, rng):
        return self.target.frozen.rvs(size=n, random_state=rng)


WEIBULL = ScipyTarget(stats.weibull_min(1.5, scale=1000.0))
LOGNORMAL = ScipyTarget(stats.lognorm(0.8, scale=500.0))
# Failure times with masses like a product-limit estimate whose last time is a failure (S = 0 there).
FAILURES = AtomsTarget([120.0, 340.0, 560.0, 610.0, 900.0, 1500.0],
                       [0.10, 0.25, 0.20, 0.15, 0.20, 0.10])


def draws(target, n, seed=SEED):
    return target.frozen.rvs(size=n, random_state=np.random.default_rng(seed))


# ---- exact samples pass, wrong models fail ----------------------------------------------

def test_exact_weibull_draws_pass_every_check():
    # Reference: scipy.stats.weibull_min draws; each p-value is >= 1e-3 and each |z| < 5
    # unless the seed is unlucky (about 0.3% of seeds would fail; this one is fixed).
    report = check(draws(WEIBULL, 100_000), WEIBULL)
    assert report.passed()


def test_exact_lognormal_draws_pass_every_check():
    # Reference: scipy.stats.lognorm draws, as above.
    report = check(draws(LOGNORMAL, 100_000), LOGNORMAL)
    assert report.passed()


def test_ks_rejects_a_weibull_shape_off_by_five_percent():
    # Draws have shape 2.0, the model says 2.1. sup|F_2.0 - F_2.1| = 0.0132 (computed from
    # the closed form 1 - exp(-t^beta)), so sqrt(n)·D is about 4.2 at n = 1e5 against a 1e-3
    # critical value of 1.95 (scipy.stats.kstwo): for KS to accept, the empirical cdf at
    # the point of largest difference would have to miss by 2.2/sqrt(n), more than 4 of
    # its standard deviations (at most 0.5/sqrt(n)).
    # (At shape 2.05 sqrt(n)·D is only 2.1, so KS has roughly even odds there; AD does not.)
    x = stats.weibull_min(2.0).rvs(size=100_000, random_state=np.random.default_rng(SEED))
    report = check(x, ScipyTarget(stats.weibull_min(2.1)))
    assert report.ks_pvalue < 1e-3


def test_ad_rejects_a_weibull_shape_off_by_two_and_a_half_percent():
    # Draws shape 2.0, model 2.05, n = 1e5. A² weights the tails, where the two laws differ
    # most in relative terms; in 20 seeded runs while writing this test every AD p-value
    # was below 2e-6, far under the 1e-3 threshold.
    x = stats.weibull_min(2.0).rvs(size=100_000, random_state=np.random.default_rng(SEED))
    report = check(x, ScipyTarget(stats.weibull_min(2.05)))
    assert report.ad_pvalue < 1e-3
    assert not report.passed()


def test_lost_upper_tail_is_caught_by_tail_mass_though_ks_misses_it():
    # Draws that never exceed the model's 99.9% point: D = 0.001 is far below KS's reach
    # at n = 1e5 (critical 0.0062), but P(X <= x_0.999) = 1 instead of 0.999 is
    # 10 binomial standard errors (sqrt(0.999·0.001/n) = 1e-4) away.
    x = draws(WEIBULL, 100_000)
    x = np.minimum(x, WEIBULL.quantile(0.999))
    report = check(x, WEIBULL)
    row = next(r for r in report.tail if r["q"] == 0.999)
    assert report.ks_pvalue > 1e-3
    assert row["z"] > 5
    assert not report.passed()


# ---- Anderson-Darling p-value -------------------------------------------------------------

@pytest.mark.parametrize("statistic, level", [(1.933, 0.10), (2.492, 0.05), (3.070, 0.025), (3.857, 0.01)])
def test_ad_asymptotic_pvalue_matches_published_critical_values(statistic, level):
    # Upper-tail points of A² for a fully specified distribution, Stephens (1974) /
    # D'Agostino & Stephens (1986) Table 4.2 (values from memory of that table).
    # The 2.5% and 1% entries sit about 1% and 2.4% above their level in probability
    # (the limiting series, and an Imhof inversion of it, put the 1% point at 3.878),
    # hence a 3% relative tolerance.
    assert anderson_darling_pvalue(statistic) == pytest.approx(level, rel=0.03)


def _limiting_ad_sf(z, terms=5000):
    """P(A²_inf > z) with A²_inf = Σ_j χ²_1,j / (j(j+1)) (Anderson & Darling 1952),
    by Imhof's (1961) inversion formula; the series beyond `terms` is replaced by its mean."""
    j = np.arange(1, terms + 1)
    lam = 1.0 / (j * (j + 1.0))
    rest = 1.0 / (terms + 1.0)

    def integrand(u):
        theta = 0.5 * np.sum(np.arctan(lam * u)) + 0.5 * (rest - z) * u
        rho = np.prod((1.0 + (lam * u) ** 2) ** 0.25)
        return np.sin(theta) / (u * rho)

    value, _ = integrate.quad(integrand, 0.0, np.inf, limit=2000, epsabs=1e-13, epsrel=1e-10)
    return 0.5 + value / np.pi


@pytest.mark.parametrize("statistic", [0.4, 1.0, 2.0, 3.0, 5.0, 10.0, 16.0])
def test_ad_asymptotic_pvalue_matches_an_independent_inversion_of_the_limiting_law(statistic):
    # Imhof's inversion (quadrature error ~2e-10) and Marsaglia's series are independent
    # routes to the same law; they agreed to 3e-12 while this test was written, so 1e-10
    # absolute is tight even in the far tail (p = 2.7e-8 at A² = 16).
    assert anderson_darling_pvalue(statistic) == pytest.approx(_limiting_ad_sf(statistic), abs=1e-10)


def test_ad_pvalues_of_uniform_samples_are_uniform():
    # Under the model the p-value is U(0,1). 2000 replicates of n = 200 uniform draws
    # (seeded); KS of the 2000 p-values against U(0,1) must not reject at 1e-3. A p-value
    # law off by 0.08 in cdf anywhere would be rejected almost surely: the 1e-3 critical D
    # at 2000 is 0.044 and the empirical cdf's sd is at most 0.011.
    u = np.sort(np.random.default_rng(SEED).random((2000, 200)), axis=1)
    p = anderson_darling_pvalue(anderson_darling_statistic(u, 1.0 - u), 200)
    assert stats.kstest(p, "uniform").pvalue > 1e-3


def test_ad_statistic_matches_scipy_for_a_fully_specified_normal():
    # Reference: scipy.stats.goodness_of_fit's 'ad' statistic with every parameter fixed,
    # which is A² for a fully specified distribution (Anderson & Darling 1954).
    x = stats.norm.rvs(size=300, random_state=np.random.default_rng(SEED))
    ref = stats.goodness_of_fit(stats.norm, x, known_params={"loc": 0.0, "scale": 1.0},
                                statistic="ad", n_mc_samples=99,
                                rng=np.random.default_rng(1)).statistic
    xs = np.sort(x)
    assert anderson_darling_statistic(stats.norm.cdf(xs), stats.norm.sf(xs)) == pytest.approx(ref, rel=1e-10)


# ---- chi-square and atoms -------------------------------------------------------------------

def test_chi_square_with_atoms_keeps_every_expected_count_at_least_five():
    # Reference: scipy rv_discrete draws. Expected counts come from cdf differences and
    # cells are merged until each holds >= 5 (the usual validity condition).
    report = check(draws(FAILURES, 5_000), FAILURES)
    cells = report.chi2_cells
    assert np.all(cells["expected"] >= 5)
    assert cells["expected"].sum() == pytest.approx(5_000)
    assert cells["observed"].sum() == 5_000


def test_chi_square_with_atoms_matches_scipy_chisquare_on_the_same_cells():
    # Reference: scipy.stats.chisquare on the report's own observed/expected cells, with
    # dof = cells - 1. Cells are (a, b] with each atom closing one, and the empty cell
    # beyond the last atom merges into its neighbour, so there is one cell per atom here.
    report = check(draws(FAILURES, 5_000), FAILURES)
    cells = report.chi2_cells
    ref = stats.chisquare(cells["observed"], cells["expected"])
    assert report.chi2_statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert report.chi2_pvalue == pytest.approx(ref.pvalue, rel=1e-9)
    assert report.chi2_dof == len(FAILURES.atoms) - 1


def test_exact_draws_from_atoms_pass_and_the_report_says_ks_is_conservative():
    # Reference: scipy rv_discrete draws; the last atom has S = 0, which must not break A².
    report = check(draws(FAILURES, 20_000), FAILURES)
    assert report.passed()
    assert any("conservative" in note for note in report.notes)


def test_ks_with_atoms_equals_the_sup_distance_over_a_fine_grid():
    # Definition: D = sup_t |F_n(t) - F(t)|; evaluate it by brute force on each atom and
    # just left of it (F from scipy), which covers every point where the sup can sit.
    x = draws(FAILURES, 2_000)
    grid = np.concatenate([FAILURES.atoms, np.nextafter(FAILURES.atoms, -np.inf)])
    f_n = np.searchsorted(np.sort(x), grid, side="right") / x.size
    d_ref = np.max(np.abs(f_n - FAILURES.cdf(grid)))
    assert check(x, FAILURES).ks_statistic == pytest.approx(d_ref, abs=1e-12)


def test_wrong_atom_masses_are_rejected_by_chi_square():
    # Draws with masses moved by 0.03 between two atoms, n = 20 000: each of the two cells
    # is off by 600 counts, against a Poisson sd of about sqrt(4000) = 63.
    wrong = AtomsTarget(FAILURES.atoms, [0.13, 0.22, 0.20, 0.15, 0.20, 0.10])
    report = check(draws(wrong, 20_000), FAILURES)
    assert report.chi2_pvalue < 1e-3


def test_default_cell_count_follows_two_n_to_the_two_fifths():
    # Common practice: about 2·n^0.4 equiprobable cells (n = 1e5 gives 200, each expecting 500).
    report = check(draws(WEIBULL, 100_000), WEIBULL)
    assert report.chi2_dof == 199
    assert np.allclose(report.chi2_cells["expected"], 500.0, rtol=1e-9)


# ---- QQ and PP ----------------------------------------------------------------------------

def test_qq_and_pp_are_thinned_to_four_hundred_points():
    report = check(draws(WEIBULL, 100_000), WEIBULL)
    for arrays in (report.qq, report.pp):
        assert all(len(v) == 400 for v in arrays.values())
    assert np.all(np.diff(report.qq["sample"]) >= 0)


def test_qq_pairs_each_order_statistic_with_the_model_quantile_at_hazen_positions():
    # With n <= 400 every order statistic is plotted at (i - 0.5)/n against scipy's ppf there.
    x = draws(WEIBULL, 150)
    report = check(x, WEIBULL)
    p = (np.arange(1, 151) - 0.5) / 150
    assert np.allclose(report.qq["p"], p)
    assert np.array_equal(report.qq["sample"], np.sort(x))
    assert np.allclose(report.qq["model"], stats.weibull_min(1.5, scale=1000.0).ppf(p))


def test_pp_compares_the_model_cdf_at_order_statistics_with_plotting_positions():
    x = draws(LOGNORMAL, 150)
    report = check(x, LOGNORMAL)
    assert np.allclose(report.pp["empirical"], (np.arange(1, 151) - 0.5) / 150)
    assert np.allclose(report.pp["model"], stats.lognorm(0.8, scale=500.0).cdf(np.sort(x)))


# ---- u-error -----------------------------------------------------------------------------

def test_u_error_of_an_exact_quantile_is_at_rounding_level():
    # scipy's weibull_min ppf and sf round-trip to near machine precision, tails included.
    assert measure_u_error(WEIBULL.quantile, WEIBULL) < 1e-13


def test_perturbed_quantile_function_is_measured_and_fails_the_tolerance():
    # Q(u) = F^-1(u + 1e-6·4u(1-u)) misses by exactly 1e-6 at u = 0.5 (the grid holds
    # points within 1e-4 of 0.5, where 4u(1-u) > 1 - 1e-7).
    frozen = WEIBULL.frozen

    def bent(u):
        return frozen.ppf(u + 1e-6 * 4 * u * (1 - u))

    sampler = Sampler(WEIBULL, quantile=bent, u_error=1e-10)
    report = check(sampler, n=20_000)
    assert report.u_error == 1e-10
    assert report.u_error_measured == pytest.approx(1e-6, rel=1e-3)
    assert not report.passed(u_tolerance=1e-8)
    assert any("exceeds" in note for note in report.notes)


def test_u_error_confined_to_the_far_tails_is_found():
    # The u grid reaches to 1e-12 from each end. Q(u) = F^-1 misplaced by 10% of the tail
    # probability where that is below 1e-9 has u-error 1e-10 at tail probability 1e-9, which an
    # even grid of 10 000 points (ends at 5e-5) would never see.
    frozen = WEIBULL.frozen

    def off_in_tails(u):
        u = np.asarray(u, dtype=float)
        v = 1.0 - u
        lower = frozen.ppf(np.where(u < 1e-9, 1.1 * u, u))
        upper = frozen.isf(np.where(v < 1e-9, 1.1 * v, v))
        return np.where(u < 0.5, lower, upper)

    assert 5e-11 < measure_u_error(off_in_tails, WEIBULL) <= 1e-10 * (1 + 1e-6)


def test_sampler_is_drawn_with_the_given_seed():
    sampler = Sampler(WEIBULL)
    report = check(sampler, n=500, rng=7)
    x = WEIBULL.frozen.rvs(size=500, random_state=np.random.default_rng(7))
    assert report.n == 500
    assert report.moments["sample_mean"] == pytest.approx(np.mean(x), rel=1e-12)
    assert report.u_error is None and report.u_error_measured is None


# ---- moments -----------------------------------------------------------------------------

def test_model_skewness_from_raw_moments_matches_scipy():
    # Reference: scipy's own skewness of the frozen Weibull and lognormal.
    for target in (WEIBULL, LOGNORMAL):
        report = check(draws(target, 1_000), target)
        ref = float(target.frozen.stats(moments="s"))
        assert report.moments["target_skewness"] == pytest.approx(ref, rel=1e-8)


def test_infinite_variance_gives_no_mean_z_and_a_note():
    # Lomax (Pareto II) with shape 1.5: finite mean, infinite variance (scipy.stats.lomax).
    target = ScipyTarget(stats.lomax(1.5, scale=100.0))
    report = check(draws(target, 5_000), target)
    assert report.moments["mean_z"] is None
    assert any("variance is infinite" in note for note in report.notes)


# ---- report ------------------------------------------------------------------------------

def test_report_is_strict_json():
    report = check(draws(FAILURES, 2_000), FAILURES)
    text = json.dumps(report.to_dict(), allow_nan=False)
    assert json.loads(text)["n"] == 2_000


def test_summary_names_each_test():
    text = check(draws(WEIBULL, 2_000), WEIBULL).summary()
    for name in ("Kolmogorov-Smirnov", "Anderson-Darling", "Chi-square", "overall"):
        assert name in text


def test_report_is_a_check_report_with_the_sample_size():
    report = check(draws(WEIBULL, 321), WEIBULL)
    assert isinstance(report, CheckReport) and report.n == 321


# ---- bad input ---------------------------------------------------------------------------

@pytest.mark.parametrize("bad", [
    np.ones((30, 2)),                       # not 1-D
    np.r_[np.ones(30), np.nan],             # NaN
    np.r_[np.ones(30), np.inf],             # infinite
    np.ones(19),                            # fewer than 20
    ["a"] * 30,                             # not numbers
])
def test_bad_samples_raise_model_error_naming_samples(bad):
    with pytest.raises(ModelError) as err:
        check(bad, WEIBULL)
    assert err.value.field == "samples"


def test_array_without_target_raises_model_error_naming_target():
    with pytest.raises(ModelError) as err:
        check(np.ones(100))
    assert err.value.field == "target"


def test_quantiles_outside_zero_one_raise_model_error():
    with pytest.raises(ModelError) as err:
        check(draws(WEIBULL, 100), WEIBULL, quantiles=(0.5, 1.0))
    assert err.value.field == "quantiles"


# ---- chi-square cells: bins=... ----------------------------------------------------------------

def test_bins_sets_the_equiprobable_cells_and_matches_scipy_chisquare():
    # Ten cells equiprobable under scipy's Weibull: counts between its deciles, against n/10 each,
    # by scipy.stats.chisquare (Pearson 1900).
    x = draws(WEIBULL, 100_000)
    report = check(x, WEIBULL, bins=10)
    edges = WEIBULL.frozen.ppf(np.arange(1, 10) / 10)
    observed = np.diff(np.concatenate([[0], np.searchsorted(np.sort(x), edges, side="right"), [x.size]]))
    ref = stats.chisquare(observed, np.full(10, x.size / 10))
    assert report.chi2_dof == 9
    assert report.chi2_statistic == pytest.approx(ref.statistic, rel=1e-9)
    assert report.chi2_pvalue == pytest.approx(ref.pvalue, rel=1e-9)


def test_bins_are_capped_so_each_cell_expects_five_draws():
    # 1000 cells asked for 1000 draws: capped at n/5 = 200 cells expecting 5 each. Cells whose
    # expected count rounds to just under 5 are merged with a neighbour (measured: 150 cells
    # remain), so the count lies between 100 and 200.
    report = check(draws(WEIBULL, 1_000), WEIBULL, bins=1_000)
    assert 100 - 1 <= report.chi2_dof <= 200 - 1
    assert np.all(report.chi2_cells["expected"] >= 5 - 1e-9)
    assert report.chi2_cells["expected"].sum() == pytest.approx(1_000, rel=1e-12)


@pytest.mark.parametrize("bins", [1, 0, -3, 2.5, "many"])
def test_bad_bins_are_a_model_error_naming_the_field(bins):
    with pytest.raises(ModelError) as err:
        check(draws(WEIBULL, 1_000), WEIBULL, bins=bins)
    assert err.value.field == "bins"


def test_more_cells_see_a_narrow_bump_that_few_cells_average_away():
    # 2 % of the draws moved into a narrow band around the median: 4 cells dilute it into one
    # cell's noise, 200 cells resolve it (the trade-off behind the 2 n^0.4 rule of thumb).
    x = draws(WEIBULL, 100_000)
    rng = np.random.default_rng(9)
    median = WEIBULL.frozen.median()
    x[:2_000] = median + rng.uniform(-1.0, 1.0, 2_000)
    few, many = check(x, WEIBULL, bins=4), check(x, WEIBULL, bins=200)
    assert many.chi2_pvalue < 1e-10 < few.chi2_pvalue
