"""Probability scores against scikit-learn, scipy and Murphy's (1973) decomposition.

References: scikit-learn ``brier_score_loss`` and ``roc_auc_score``
(Pedregosa et al. 2011, JMLR 12:2825); scipy ``mannwhitneyu``; Murphy
(1973, J. Appl. Meteor. 12:595); Mason and Graham (2002, Q. J. R.
Meteorol. Soc. 128:2145).
"""
import numpy as np
import pytest
from scipy import stats
from sklearn.metrics import brier_score_loss, roc_auc_score

from assimilation import probability_scores as ps


def _random_cases(seed, n=500, members=20):
    """Ensemble-like probabilities k/M and outcomes that depend on them."""
    rng = np.random.default_rng(seed)
    p = rng.integers(0, members + 1, size=n) / members
    o = rng.random(n) < 0.15 + 0.7 * p
    return p, o


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_brier_score_matches_scikit_learn(seed):
    p, o = _random_cases(seed)
    assert ps.brier_score(p, o) == pytest.approx(brier_score_loss(o, p), abs=1e-12)   # sklearn (y_true, y_prob)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_roc_area_matches_scikit_learn_and_the_mann_whitney_statistic(seed):
    p, o = _random_cases(seed)
    area = ps.roc_area(p, o)
    assert area == pytest.approx(roc_auc_score(o, p), abs=1e-12)   # sklearn (y_true, y_score)
    u = stats.mannwhitneyu(p[o], p[~o]).statistic                   # scipy, ties counted one half
    assert area == pytest.approx(u / (o.sum() * (~o).sum()), abs=1e-12)  # Mason and Graham (2002)


def test_roc_area_with_continuous_probabilities_matches_scikit_learn():
    rng = np.random.default_rng(9)
    p = rng.random(300)
    o = rng.random(300) < p
    assert ps.roc_area(p, o) == pytest.approx(roc_auc_score(o, p), abs=1e-12)


def test_roc_points_run_from_never_warning_to_always_warning():
    far, hit = ps.roc_points([0.1, 0.4, 0.4, 0.9], [False, True, False, True])
    np.testing.assert_allclose(far, [0.0, 0.0, 0.5, 1.0])
    np.testing.assert_allclose(hit, [0.0, 0.5, 1.0, 1.0])


def test_murphy_decomposition_of_a_hand_worked_example():
    # p = 0.1 on 5 cases with 1 event (ō₁ = 0.2), p = 0.5 on 2 cases with 1 event (ō₂ = 0.5),
    # p = 0.9 on 3 cases with 3 events (ō₃ = 1); N = 10, ō = 5/10 = 0.5.
    # REL = [5(0.1−0.2)² + 2(0.5−0.5)² + 3(0.9−1)²]/10 = (0.05 + 0 + 0.03)/10 = 0.008
    # RES = [5(0.2−0.5)² + 2(0.5−0.5)² + 3(1−0.5)²]/10 = (0.45 + 0 + 0.75)/10 = 0.12
    # UNC = 0.5·0.5 = 0.25
    # BS  = [4·0.1² + 0.9² + 2·0.5² + 3·0.1²]/10 = (0.04 + 0.81 + 0.5 + 0.03)/10 = 0.138
    #     = REL − RES + UNC = 0.008 − 0.12 + 0.25 (Murphy 1973)
    p = np.array([0.1] * 5 + [0.5] * 2 + [0.9] * 3)
    o = np.array([1, 0, 0, 0, 0, 1, 0, 1, 1, 1])
    d = ps.brier_decomposition(p, o)
    assert d.reliability == pytest.approx(0.008, abs=1e-12)
    assert d.resolution == pytest.approx(0.12, abs=1e-12)
    assert d.uncertainty == pytest.approx(0.25, abs=1e-12)
    assert d.brier == pytest.approx(0.138, abs=1e-12)
    np.testing.assert_array_equal(d.bin_count, [5, 2, 3])
    np.testing.assert_allclose(d.bin_frequency, [0.2, 0.5, 1.0])


@pytest.mark.parametrize("seed", [4, 5, 6, 7])
def test_murphy_identity_holds_exactly_on_discrete_probability_cases(seed):
    p, o = _random_cases(seed, members=10)
    d = ps.brier_decomposition(p, o)
    assert d.reliability - d.resolution + d.uncertainty == pytest.approx(brier_score_loss(o, p), abs=1e-12)
    assert d.within_bin_spread == 0.0
    coarse = ps.brier_decomposition(p, o, bins=11)   # equal-width bins of 1/11 hold one value k/10 each
    assert coarse.reliability == pytest.approx(d.reliability, abs=1e-12)


def test_murphy_terms_leave_a_within_bin_residual_when_bins_mix_forecast_values():
    rng = np.random.default_rng(8)
    p = rng.random(400)
    o = rng.random(400) < p
    d = ps.brier_decomposition(p, o, bins=5)
    assert d.within_bin_spread > 0
    assert d.reliability - d.resolution + d.uncertainty != pytest.approx(d.brier, abs=1e-6)


def test_brier_skill_score_against_climatology_and_a_reference_forecast():
    p, o = _random_cases(11)
    base = o.mean()
    assert ps.brier_skill_score(p, o) == pytest.approx(1 - brier_score_loss(o, p) / (base * (1 - base)), abs=1e-12)
    ref = np.clip(p + 0.2, 0, 1)
    assert ps.brier_skill_score(p, o, ref) == pytest.approx(
        1 - brier_score_loss(o, p) / brier_score_loss(o, ref), abs=1e-12)
    assert ps.brier_skill_score(p, o, reference=base) == pytest.approx(ps.brier_skill_score(p, o), abs=1e-12)
    with pytest.raises(ValueError, match="reference forecast is perfect"):
        ps.brier_skill_score(p, o, reference=o.astype(float))


def test_contingency_counts_warn_at_or_above_the_warning_probability():
    p = np.array([0.0, 0.3, 0.3, 0.5, 0.8, 0.1])
    o = np.array([False, True, False, True, False, True])
    c = ps.contingency_counts(p, o, 0.3)
    assert (c.hits, c.misses, c.false_alarms, c.correct_negatives) == (2, 1, 2, 1)
    assert c.hit_rate == pytest.approx(2 / 3)
    assert c.false_alarm_ratio == pytest.approx(0.5)
    assert c.false_alarm_rate == pytest.approx(2 / 3)


def test_probability_scores_reject_bad_input():
    with pytest.raises(ValueError, match="probabilities must lie in"):
        ps.brier_score([1.2, 0.5], [1, 0])
    with pytest.raises(ValueError, match="outcomes must be booleans or 0/1"):
        ps.brier_score([0.2, 0.5], [2, 0])
    with pytest.raises(ValueError, match="one event and one non-event"):
        ps.roc_area([0.2, 0.5], [0, 0])
    with pytest.raises(ValueError, match="bins must be a positive whole number"):
        ps.brier_decomposition([0.2, 0.5], [0, 1], bins=0)
