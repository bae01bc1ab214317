"""The calibrated blend: quantile averaging, calibration on a record, ensemble copula coupling."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from assimilation import blend as bl
from assimilation import scores


def test_a_process_only_blend_without_correction_returns_the_process_members_in_place():
    rng = np.random.default_rng(1)
    process = rng.lognormal(1.0, 0.5, (8, 60))
    out, raw = bl.blend({"process_model": process}, "process_model", [bl.LeadSettings({"process_model": 1.0})] * 7)
    np.testing.assert_allclose(out, process, rtol=1e-12)
    np.testing.assert_allclose(raw, process, rtol=1e-12)


def test_the_linear_pool_of_two_normals_has_the_mixture_distribution():
    # a linear pool is the weighted mixture: F(x) = 0.25·Φ((x−1)/0.5) + 0.75·Φ((x−3)/1.5) (scipy.stats.norm)
    m = 4000
    p = bl.plotting_positions(m)
    a, b = stats.norm.ppf(p, 1.0, 0.5), stats.norm.ppf(p, 3.0, 1.5)
    z = bl.linear_pool({"a": a, "b": b}, {"a": 0.25, "b": 0.75}, m)
    mixture_cdf = 0.25 * stats.norm.cdf(z, 1.0, 0.5) + 0.75 * stats.norm.cdf(z, 3.0, 1.5)
    np.testing.assert_allclose(mixture_cdf, p, atol=2e-3)


def test_calibration_removes_the_bias_and_scales_the_spread_about_the_mean():
    z = np.array([0.0, 1.0, 2.0, 3.0])
    out = bl.calibrate(z, bias_ln=0.5, spread_factor=2.0)
    assert out.mean() == pytest.approx(z.mean() - 0.5)
    assert out.std() == pytest.approx(2.0 * z.std())
    assert bl.calibrate(z, 0.0, 100.0).std() == pytest.approx(bl.SPREAD_FACTOR_BOUNDS[1] * z.std())


def test_ecc_gives_the_calibrated_values_the_rank_order_of_the_process_members():
    rng = np.random.default_rng(2)
    template, values = rng.normal(size=50), rng.normal(3.0, 2.0, size=50)
    out = bl.ecc_order(values, template)
    np.testing.assert_array_equal(np.sort(out), np.sort(values))
    assert stats.spearmanr(out, template).statistic == pytest.approx(1.0)


def test_inverse_crps_weights_follow_the_record_and_fall_back_to_the_prior():
    prior = {"process_model": 0.4, "persistence_ensemble": 0.3, "statistical": 0.3}
    assert bl.inverse_crps_weights({}, {}, prior, 20) == pytest.approx(prior)
    w = bl.inverse_crps_weights({"process_model": 2.0, "persistence_ensemble": 1.0, "statistical": 1.0},
                                {"process_model": 10_000, "persistence_ensemble": 10_000, "statistical": 10_000},
                                prior, 20)
    # weights ∝ 1/CRPS²: 1/4 : 1 : 1 → 1/9, 4/9, 4/9 once the record dominates the prior
    assert w["process_model"] == pytest.approx(1 / 9, abs=2e-3)
    assert w["statistical"] == pytest.approx(4 / 9, abs=2e-3)
    assert sum(w.values()) == pytest.approx(1.0)


def test_a_biased_overconfident_forecast_calibrated_on_its_record_covers_new_days_as_it_should():
    """A seeded synthetic check of the EMOS idea (Gneiting et al. 2005): learn the bias and spread of a
    forecaster on 300 days, apply them to 300 new days, and the 90 % interval covers ≈ 90 %."""
    from monitor.forecasting.blend_setup import lead_settings

    rng = np.random.default_rng(3)
    m, days = 60, 600
    signal = rng.normal(1.5, 0.8, days)
    observed = np.exp(signal + rng.normal(0, 0.4, days))          # truth: log error sd 0.4
    members = np.exp(signal[:, None] - 0.3 + rng.normal(0, 0.1, (days, m)))   # biased low, far too narrow
    logm = np.log(members)
    record = pd.DataFrame({"forecaster": "blend_raw", "members": m, "observed": observed[:300],
                           "log_mean": logm[:300].mean(axis=1), "log_sd": logm[:300].std(axis=1, ddof=1),
                           "crps": 1.0})
    s = lead_settings(record)
    assert s.bias_ln == pytest.approx(-0.3, abs=0.06)
    assert s.spread_factor > 2.5
    cal = np.exp(np.stack([bl.calibrate(z, s.bias_ln, s.spread_factor) for z in logm[300:]]))
    lo, hi = np.quantile(cal, [0.05, 0.95], axis=1)
    before = np.mean((np.quantile(members[300:], 0.05, axis=1) <= observed[300:])
                     & (observed[300:] <= np.quantile(members[300:], 0.95, axis=1)))
    after = np.mean((lo <= observed[300:]) & (observed[300:] <= hi))
    assert before < 0.4 and 0.84 <= after <= 0.96
    assert np.mean(scores.crps_ensemble(cal.T, observed[300:])) < np.mean(scores.crps_ensemble(members[300:].T,
                                                                                                 observed[300:]))
