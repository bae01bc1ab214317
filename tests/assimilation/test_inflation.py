"""Inflation and the guard against parameter collapse."""
import numpy as np
import pytest

from assimilation import inflation


def test_multiplicative_inflation_scales_spread_and_keeps_mean():
    # Anderson and Anderson (1999): anomalies times the factor.
    E = np.random.default_rng(0).standard_normal((50, 4))
    Ei = inflation.inflate_multiplicative(E, 1.1)
    np.testing.assert_allclose(Ei.mean(axis=0), E.mean(axis=0), atol=1e-14)
    np.testing.assert_allclose(Ei.std(axis=0), 1.1 * E.std(axis=0), rtol=1e-12)


def test_multiplicative_inflation_only_on_chosen_columns():
    E = np.random.default_rng(1).standard_normal((20, 4))
    Ei = inflation.inflate_multiplicative(E, 1.5, columns=slice(0, 2))
    np.testing.assert_array_equal(Ei[:, 2:], E[:, 2:])


def test_relaxation_to_prior_spread_follows_whitaker_and_hamill():
    # Whitaker and Hamill (2012), Mon. Wea. Rev. 140:3078, eq. (4):
    # sigma_new = sigma_a + alpha (sigma_b - sigma_a).
    rng = np.random.default_rng(2)
    prior = 3.0 * rng.standard_normal((40, 3))
    post = 0.5 * rng.standard_normal((40, 3)) + 1.0
    alpha = 0.6
    out = inflation.relax_to_prior_spread(prior, post, alpha)
    sb, sa = prior.std(axis=0, ddof=1), post.std(axis=0, ddof=1)
    np.testing.assert_allclose(out.std(axis=0, ddof=1), sa + alpha * (sb - sa), rtol=1e-12)
    np.testing.assert_allclose(out.mean(axis=0), post.mean(axis=0), atol=1e-12)


def test_floor_spread_raises_collapsed_parameters_only():
    rng = np.random.default_rng(3)
    E = np.c_[1e-4 * rng.standard_normal(30), rng.standard_normal(30)]
    out = inflation.floor_spread(E, 0.05)
    assert out[:, 0].std(ddof=1) == pytest.approx(0.05)
    np.testing.assert_array_equal(out[:, 1], E[:, 1])


def test_inflation_factor_must_be_positive():
    with pytest.raises(ValueError, match="inflation factor must be > 0"):
        inflation.inflate_multiplicative(np.zeros((3, 2)), 0.0)
