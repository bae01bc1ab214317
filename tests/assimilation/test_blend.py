"""The calibrated blend: quantile averaging, minimum-CRPS calibration on a record, ensemble copula coupling."""

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


def test_the_quantile_average_of_two_normals_is_the_normal_with_averaged_mean_and_sd():
    # Vincentization of N(1, 0.5²) and N(3, 1.5²) with weights 0.25/0.75 is N(2.5, 1.25²) (scipy.stats.norm)
    m = 400
    p = bl.plotting_positions(m)
    a, b = stats.norm.ppf(p, 1.0, 0.5), stats.norm.ppf(p, 3.0, 1.5)
    z = bl.quantile_average({"a": a, "b": b}, {"a": 0.25, "b": 0.75}, m)
    np.testing.assert_allclose(z, stats.norm.ppf(p, 2.5, 1.25), atol=1e-9)


def test_the_quantile_average_of_different_member_counts_reads_each_at_the_plotting_positions():
    m = 60
    one = np.linspace(0.0, 1.0, 60)
    z = bl.quantile_average({"a": one, "b": one[::3]}, {"a": 1.0, "b": 1.0}, m)
    assert np.all(np.diff(z) >= 0) and z.min() >= 0.0 and z.max() <= 1.0
    np.testing.assert_allclose(bl.quantile_average({"a": one[::-1]}, {"a": 2.0}, m), one)


def test_the_crps_of_a_quantile_average_is_at_most_the_weighted_mean_crps_of_its_components():
    """CRPS = 2∫QS_τ dτ and each quantile score is convex in the quantile (Lichtendahl et al. 2013)."""
    rng = np.random.default_rng(5)
    m = 80
    for _ in range(50):
        a, b = rng.normal(0, 1, m), rng.normal(rng.normal(0, 2), rng.uniform(0.2, 3), m)
        w = rng.uniform(0.05, 0.95)
        y = rng.normal(0, 2)
        z = bl.quantile_average({"a": a, "b": b}, {"a": w, "b": 1 - w}, m)
        crps = [float(scores.crps_ensemble(e[:, None], np.array([y]))[0]) for e in (z, a, b)]
        assert crps[0] <= w * crps[1] + (1 - w) * crps[2] + 1e-9


def test_the_closed_form_normal_crps_matches_properscoring():
    import properscoring

    rng = np.random.default_rng(6)
    mu, sig, y = rng.normal(size=200), rng.uniform(0.1, 3.0, 200), rng.normal(size=200) * 2
    np.testing.assert_allclose(bl.crps_normal(mu, sig, y), properscoring.crps_gaussian(y, mu, sig), rtol=1e-10)


def test_the_objective_gradient_matches_finite_differences():
    from scipy.optimize import check_grad

    rng = np.random.default_rng(7)
    mu, sd, y = rng.normal(size=(120, 3)), rng.uniform(0.1, 1.0, (120, 3)), rng.normal(size=120)
    theta = np.array([0.3, -0.5, 0.1, np.log(1.3)])
    err = check_grad(lambda t: bl.combination_objective(t, mu, sd, y)[0],
                     lambda t: bl.combination_objective(t, mu, sd, y)[1], theta)
    assert err < 1e-6


def test_the_fitted_combination_finds_the_informative_component_and_its_spread():
    """Synthetic truth: y = x + N(0, 0.3²); component "good" is centred on x (sd 0.15, too narrow),
    "noise" on pure noise (sd 1). Minimum-CRPS estimation (Gneiting et al. 2005) should put nearly all
    weight on "good" and widen its spread to the true error sd."""
    rng = np.random.default_rng(8)
    n = 2000
    x = rng.normal(0, 1, n)
    y = x + rng.normal(0, 0.3, n)
    mu = np.column_stack([x, rng.normal(0, 1, n)])
    sd = np.column_stack([np.full(n, 0.15), np.full(n, 1.0)])
    w, s = bl.fit_combination(mu, sd, y, np.array([0.5, 0.5]))
    assert w[0] > 0.9
    # the combined sd s·(w·σ) should match the true error sd 0.3
    assert s * (w @ sd[0]) == pytest.approx(0.3, abs=0.05)


def test_shrinkage_gives_the_prior_without_cases_and_the_fit_with_many():
    prior = {"process_model": 0.4, "persistence_ensemble": 0.3, "statistical": 0.3}
    fitted = (np.array([0.0, 0.2, 0.8]), 2.0)
    names = ["process_model", "persistence_ensemble", "statistical"]
    none = bl.shrink_settings(names, fitted, prior, 0, 20)
    assert none.weights == pytest.approx(prior) and none.spread_factor == 1
    many = bl.shrink_settings(names, fitted, prior, 10 ** 7, 20)
    assert many.weights.get("process_model", 0.0) == pytest.approx(0.0, abs=1e-5)
    assert many.weights["statistical"] == pytest.approx(0.8, abs=1e-5)
    assert many.spread_factor == pytest.approx(2.0, abs=1e-4)


def test_calibration_scales_the_spread_about_the_mean():
    z = np.array([0.0, 1.0, 2.0, 3.0])
    out = bl.calibrate(z, spread_factor=2.0)
    assert out.mean() == pytest.approx(z.mean())
    assert out.std() == pytest.approx(2.0 * z.std())
    assert bl.calibrate(z, 100.0).std() == pytest.approx(bl.SPREAD_FACTOR_BOUNDS[1] * z.std())


def test_ecc_gives_the_calibrated_values_the_rank_order_of_the_process_members():
    rng = np.random.default_rng(2)
    template, values = rng.normal(size=50), rng.normal(3.0, 2.0, size=50)
    out = bl.ecc_order(values, template)
    np.testing.assert_array_equal(np.sort(out), np.sort(values))
    assert stats.spearmanr(out, template).statistic == pytest.approx(1.0)


def test_an_overconfident_forecast_calibrated_on_its_record_covers_new_days_as_it_should():
    """A seeded synthetic check of the EMOS idea (Gneiting et al. 2005): learn the spread of a forecaster
    on 300 days, apply it to 300 new days, and the 90 % interval covers ≈ 90 %."""
    from monitor.forecasting.blend_setup import lead_settings

    rng = np.random.default_rng(3)
    m, days = 60, 600
    signal = rng.normal(1.5, 0.8, days)
    observed = np.exp(signal + rng.normal(0, 0.4, days))          # truth: log error sd 0.4
    members = np.exp(signal[:, None] + rng.normal(0, 0.1, (days, m)))   # far too narrow
    logm = np.log(members)
    record = pd.DataFrame({"run_id": np.arange(300), "basin_id": "main", "lead_days": 1, "forecaster": "process_model",
                           "members": m, "observed": observed[:300], "log_mean": logm[:300].mean(axis=1),
                           "log_sd": logm[:300].std(axis=1, ddof=1), "crps": 1.0})
    s = lead_settings(record)
    assert s.weights["process_model"] > 0.9
    assert s.spread_factor > 2.5
    cal = np.exp(np.stack([bl.calibrate(z, s.spread_factor) for z in logm[300:]]))
    lo, hi = np.quantile(cal, [0.05, 0.95], axis=1)
    before = np.mean((np.quantile(members[300:], 0.05, axis=1) <= observed[300:])
                     & (observed[300:] <= np.quantile(members[300:], 0.95, axis=1)))
    after = np.mean((lo <= observed[300:]) & (observed[300:] <= hi))
    assert before < 0.4 and 0.84 <= after <= 0.96
    assert np.mean(scores.crps_ensemble(cal.T, observed[300:])) < np.mean(scores.crps_ensemble(members[300:].T,
                                                                                                 observed[300:]))


def test_the_case_table_holds_what_a_pandas_pivot_of_the_records_holds():
    from monitor.forecasting.blend_setup import COMPONENTS, case_table

    rng = np.random.default_rng(9)
    rows = [dict(run_id=r, basin_id=b, lead_days=k, forecaster=f, log_mean=rng.normal(), log_sd=rng.uniform(.1, 1),
                 observed=float(np.exp(r % 7 + k)))
            for r in range(40) for b in ("east", "west") for k in (1, 2) for f in (*COMPONENTS, "persistence")
            if rng.uniform() > 0.2]
    records = pd.DataFrame(rows)
    table = case_table(records)
    for k, cases in table.items():
        sub = records[(records.lead_days == k) & records.forecaster.isin(COMPONENTS)]
        ref = sub.pivot_table(index=["run_id", "basin_id"], columns="forecaster", values="log_mean", sort=False)
        got = pd.DataFrame(cases.mu, columns=COMPONENTS)
        # same set of (run, basin) rows and the same value in every cell (pandas pivot_table)
        assert len(got) == len(ref)
        np.testing.assert_allclose(np.sort(got[list(ref.columns)].fillna(-99).to_numpy(), axis=0),
                                   np.sort(ref.fillna(-99).to_numpy(), axis=0))
        assert np.all(np.isfinite(cases.y))


def test_with_heavy_tailed_errors_the_coverage_floor_restores_the_90_percent_interval():
    """Errors from a Student t with 3 degrees of freedom (scipy.stats.t): the minimum-CRPS normal is too
    narrow for its 90 % interval; the coverage factor widens it to cover ≈ 90 % of new cases."""
    rng = np.random.default_rng(10)
    n = 4000
    x = rng.normal(0, 1, n)
    y = x + 0.3 * stats.t.rvs(3, size=n, random_state=rng)
    mu, sd = x[:, None], np.full((n, 1), 0.3)
    w, s_crps = bl.fit_combination(mu[:2000], sd[:2000], y[:2000], np.array([1.0]))
    s_cov = bl.coverage_spread_factor(mu[:2000], sd[:2000], y[:2000], w)
    half = stats.norm.ppf(0.95)
    cover = lambda s: np.mean(np.abs(y[2000:] - x[2000:]) <= half * s * 0.3)  # noqa: E731
    assert cover(s_crps) < 0.88
    assert s_cov > s_crps and abs(cover(s_cov) - 0.90) < 0.02


def test_pooled_probabilities_of_the_process_alone_are_its_member_fractions():
    from assimilation.forecast import member_statistics

    rng = np.random.default_rng(11)
    process = rng.lognormal(1.0, 0.6, (8, 60))
    settings = [bl.LeadSettings({"process_model": 1.0})] * 7
    daily, horizon = bl.pooled_probabilities({"process_model": process}, "process_model", settings, (3.0, 6.0))
    stats_ = member_statistics(np.arange(8.0), process[:, :, None], (3.0, 6.0))
    np.testing.assert_allclose(daily, stats_.exceedance[:, 0, :])
    np.testing.assert_allclose(horizon, stats_.horizon_exceedance[0])


def test_pooled_probabilities_are_the_weighted_mean_of_the_components():
    """A linear opinion pool (Stone 1961): with weights 0.25 / 0.75, P = 0.25·P_a + 0.75·P_b per day; within
    the horizon the statistical component counts its largest daily probability."""
    K1, m = 4, 40
    a = np.tile(np.linspace(0, 10, m), (K1, 1))                 # P(≥ 5) = 0.5 every day, any day 0.5
    b = np.full((K1, m), 1.0)
    b[2, :10] = 9.0                                              # P(≥ 5) = 0.25 on day 2 only
    settings = [bl.LeadSettings({"process_model": 0.25, "statistical": 0.75})] * 3
    daily, horizon = bl.pooled_probabilities({"process_model": a, "statistical": b}, "process_model", settings, (5.0,))
    np.testing.assert_allclose(daily[1:, 0], [0.25 * 0.5, 0.25 * 0.5 + 0.75 * 0.25, 0.25 * 0.5])
    assert horizon[0] == pytest.approx(0.25 * 0.5 + 0.75 * 0.25)
