"""Ensemble scores against properscoring, closed forms and the statistics of calibrated ensembles.

References: properscoring (The Climate Corporation, PyPI) ``crps_ensemble``
and ``crps_gaussian``; Hersbach (2000, Wea. Forecasting 15:559); Ferro
(2014, Q. J. R. Meteorol. Soc. 140:1917); Hamill (2001, Mon. Wea. Rev.
129:550); Fortin et al. (2014, J. Hydrometeor. 15:1708, from memory).
"""
import numpy as np
import properscoring
import pytest
from scipy import stats

from assimilation import scores


def _pairwise_crps(E, y, fair):
    """The defining double sum, O(M²), case by case (Hersbach 2000; Ferro 2014)."""
    M = E.shape[0]
    first = np.abs(E - y).mean(axis=0)
    pair = np.abs(E[:, None, :] - E[None, :, :]).sum(axis=(0, 1))
    return first - pair / (2 * M * (M - 1) if fair else 2 * M * M)


def test_crps_of_the_worked_ensemble_matches_the_hand_value():
    E = np.array([[0.0], [1.0], [2.0], [3.0]])
    y = np.array([1.5])
    # (1/4)(1.5+0.5+0.5+1.5) = 1; ΣΣ|xi−xj| = 20: standard 1 − 20/32 = 0.375 (Hersbach 2000),
    # fair 1 − 20/24 = 1/6 (Ferro 2014)
    assert scores.crps_ensemble(E, y)[0] == pytest.approx(0.375, abs=1e-12)
    assert scores.crps_ensemble(E, y, fair=True)[0] == pytest.approx(1.0 / 6.0, abs=1e-12)


@pytest.mark.parametrize("members", [1, 2, 5, 20, 51])
def test_crps_ensemble_matches_properscoring_on_random_cases(members):
    rng = np.random.default_rng(members)
    E = rng.gamma(2.0, 3.0, size=(members, 400))
    y = rng.gamma(2.0, 3.0, size=400)
    E[:, :50] = np.round(E[:, :50])            # ties among members and with the observation
    y[:50] = np.round(y[:50])
    expected = properscoring.crps_ensemble(y, E.T)   # properscoring: members on the last axis
    np.testing.assert_allclose(scores.crps_ensemble(E, y), expected, rtol=1e-10, atol=1e-12)


def test_crps_of_a_point_forecast_is_the_absolute_error():
    y = np.array([1.0, 4.0, -2.0])
    E = np.array([[2.5, 4.0, 1.0]])
    np.testing.assert_allclose(scores.crps_ensemble(E, y), [1.5, 0.0, 3.0])
    np.testing.assert_allclose(scores.crps_ensemble(E, y, fair=True), [1.5, 0.0, 3.0])


@pytest.mark.parametrize("members", [2, 3, 4, 7])
def test_sorted_crps_matches_the_defining_double_sum_in_both_forms(members):
    rng = np.random.default_rng(10 + members)
    E = rng.normal(size=(members, 30))
    y = rng.normal(size=30)
    for fair in (False, True):
        np.testing.assert_allclose(scores.crps_ensemble(E, y, fair=fair), _pairwise_crps(E, y, fair), atol=1e-12)


def test_fair_crps_of_small_ensembles_is_unbiased_for_the_parent_distribution():
    # Ferro (2014): the fair CRPS of M draws from F has expectation CRPS(F, y); the standard
    # form exceeds it by E|X−X'|/(2M) = 1/(M√π) for N(0, 1), whose E|X−X'| = 2/√π
    rng = np.random.default_rng(7)
    n, M = 200_000, 4
    E = rng.standard_normal((M, n))
    y = rng.standard_normal(n)
    parent = scores.crps_gaussian(0.0, 1.0, y)
    fair_gap = scores.crps_ensemble(E, y, fair=True) - parent
    standard_gap = scores.crps_ensemble(E, y) - parent
    assert abs(fair_gap.mean()) < 4 * fair_gap.std() / np.sqrt(n)
    assert standard_gap.mean() == pytest.approx(1 / (M * np.sqrt(np.pi)), abs=4 * standard_gap.std() / np.sqrt(n))


def test_crps_gaussian_matches_properscoring():
    rng = np.random.default_rng(3)
    mu = rng.normal(size=300)
    sd = rng.gamma(2.0, 0.5, size=300)
    y = rng.normal(size=300)
    expected = properscoring.crps_gaussian(y, mu, sd)   # properscoring: (observations, mu, sig)
    np.testing.assert_allclose(scores.crps_gaussian(mu, sd, y), expected, rtol=1e-10, atol=1e-12)


def test_crps_gaussian_with_no_spread_is_the_absolute_error():
    # the limit sd → 0 of Gneiting et al. (2005); properscoring divides by sd, so it is not used here
    np.testing.assert_allclose(scores.crps_gaussian([1.0, -1.0], 0.0, [3.0, -1.5]), [2.0, 0.5])


def test_crps_is_nan_where_the_observation_is_missing():
    out = scores.crps_ensemble(np.array([[1.0, 2.0], [3.0, 4.0]]), np.array([np.nan, 2.0]))
    assert np.isnan(out[0]) and np.isfinite(out[1])


def test_absolute_and_log_errors_use_the_floor_and_skip_missing_observations():
    f = np.array([2.0, 10.0, 0.0, 5.0])
    o = np.array([4.0, 10.0, 0.05, np.nan])
    assert scores.mean_absolute_error(f, o) == pytest.approx((2.0 + 0.0 + 0.05) / 3)
    # 0 and 0.05 both count as the 0.1 µg/L floor: log error 0 for the third case
    assert scores.mean_absolute_log_error(f, o) == pytest.approx(np.log(2.0) / 3)
    assert scores.mean_log_bias(f, o) == pytest.approx(-np.log(2.0) / 3)
    assert scores.mean_log_bias(2 * o[:2], o[:2]) == pytest.approx(np.log(2.0))


def test_coverage_of_a_calibrated_ensemble_matches_the_nominal_level():
    rng = np.random.default_rng(11)
    n = 20_000
    E = rng.standard_normal((200, n))
    y = rng.standard_normal(n)
    for level in (0.5, 0.9):
        # binomial standard error sqrt(level(1−level)/n); 200 members give the quantiles to ~1 %
        assert scores.ensemble_interval_coverage(E, y, level) == pytest.approx(level, abs=0.02)
    lo, hi = stats.norm.ppf(0.05), stats.norm.ppf(0.95)   # scipy quantiles of N(0, 1)
    assert scores.interval_coverage(np.full(n, lo), np.full(n, hi), y) == pytest.approx(0.9, abs=4 * np.sqrt(0.09 / n))


def test_spread_error_ratio_is_one_for_a_calibrated_ensemble_only_with_the_correction():
    # members and observation drawn from one N(m, 1) per case: E(mean − y)² = (M+1)/M (Fortin et al. 2014)
    rng = np.random.default_rng(5)
    M, n = 5, 40_000
    centre = rng.normal(0.0, 3.0, size=n)
    E = centre + rng.standard_normal((M, n))
    y = centre + rng.standard_normal(n)
    assert scores.spread_error_ratio(E, y) == pytest.approx(1.0, abs=0.015)
    raw = scores.spread_error_ratio(E, y, finite_ensemble_correction=False)
    assert raw == pytest.approx(np.sqrt(M / (M + 1)), abs=0.015)   # 0.913
    assert scores.spread_error_ratio(0.5 * (E - centre) + centre, y) < 0.6   # under-dispersed


def test_rank_histogram_is_flat_for_a_calibrated_ensemble():
    rng = np.random.default_rng(2001)
    M, n = 10, 11_000
    E = rng.standard_normal((M, n))
    y = rng.standard_normal(n)
    counts = scores.rank_histogram(E, y, rng)
    assert counts.shape == (M + 1,) and counts.sum() == n
    assert stats.chisquare(counts).pvalue > 0.01       # scipy chi-square against the uniform
    under = scores.rank_histogram(0.6 * E, y, rng)      # too little spread: U shape (Hamill 2001)
    assert stats.chisquare(under).pvalue < 1e-6 and under[0] > under[M // 2] < under[-1]


def test_rank_histogram_breaks_ties_at_random_so_a_discrete_calibrated_ensemble_stays_flat():
    rng = np.random.default_rng(42)
    M, n = 8, 9_000
    E = rng.poisson(3.0, size=(M, n)).astype(float)    # many members equal the observation
    y = rng.poisson(3.0, size=n).astype(float)
    counts = scores.rank_histogram(E, y, rng)
    assert stats.chisquare(counts).pvalue > 0.01
    below_only = np.bincount((E < y).sum(axis=0), minlength=M + 1)   # ties unbroken: piles up low
    assert stats.chisquare(below_only).pvalue < 1e-6


def test_rank_histogram_leaves_out_cases_without_an_observation():
    rng = np.random.default_rng(0)
    counts = scores.rank_histogram(np.array([[0.0, 0.0, 0.0], [2.0, 2.0, 2.0]]), np.array([1.0, np.nan, 3.0]), rng)
    np.testing.assert_array_equal(counts, [0, 1, 1])


def test_scores_reject_badly_shaped_or_non_finite_input():
    with pytest.raises(ValueError, match="expected an ensemble E"):
        scores.crps_ensemble(np.ones((3, 4)), np.ones(5))
    with pytest.raises(ValueError, match="ensemble members must be finite"):
        scores.crps_ensemble(np.array([[np.nan, 1.0]]), np.ones(2))
    with pytest.raises(ValueError, match="sd must be >= 0"):
        scores.crps_gaussian(0.0, -1.0, 0.0)
    with pytest.raises(ValueError, match="level must be in"):
        scores.central_interval(np.ones((3, 2)), 90)
    with pytest.raises(ValueError, match="concentrations must be >= 0"):
        scores.mean_absolute_log_error(np.array([-1.0]), np.array([1.0]))
    with pytest.raises(ValueError, match="at least 2 members"):
        scores.spread_error_ratio(np.ones((1, 3)), np.ones(3))
