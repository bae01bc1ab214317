"""Baseline forecasters against statsmodels, scipy and their own documented definitions.

References: statsmodels ``SARIMAX`` (Seabold and Perktold 2010, Proc. 9th
Python in Science Conf.) fitted directly on the same series; scipy
``stats.norm.ppf`` for the prior's normal quantiles. The series are
invented and seeded.
"""
import warnings

import numpy as np
import pytest
from scipy import stats
from statsmodels.tools.sm_exceptions import ConvergenceWarning
from statsmodels.tsa.statespace.sarimax import SARIMAX

from assimilation import baselines as bl

DAY0 = 19_358.0   # 2023-01-01 in epoch days
HORIZON = 10


def _lake_series(seed=1, n=760):
    """Daily chlorophyll-a [µg/L] with a seasonal cycle, AR(1) noise and a temperature effect; gaps as NaN."""
    rng = np.random.default_rng(seed)
    t = np.arange(n, dtype=float)
    temperature = 14.0 + 9.0 * np.sin(2 * np.pi * (t - 110) / 365.25) + rng.normal(0, 0.5, n)
    noise = np.zeros(n)
    for k in range(1, n):
        noise[k] = 0.8 * noise[k - 1] + rng.normal(0, 0.2)
    chl = np.exp(0.5 + 0.08 * temperature + noise)
    chl[rng.random(n) < 0.25] = np.nan       # a quarter of the days missing
    chl[300:320] = np.nan                      # and a three-week gap
    chl[0] = np.exp(1.0)                       # first day observed
    return DAY0 + t, chl, temperature


def _fit_directly(z, exog=None):
    """statsmodels' default fit; its ConvergenceWarning (an L-BFGS line-search stop) is
    recorded by the baseline, and silenced here so both fits run the same optimiser."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return SARIMAX(z, exog=exog, order=(1, 0, 0), trend="c").fit(disp=False)


def _log_members(forecast):
    return np.log(forecast.members_ugL)


def test_ar1_baseline_matches_statsmodels_fitted_directly_on_the_same_series():
    days, chl, temp = _lake_series()
    origin = 500
    fc = bl.ar1_forecast(days, chl, days[origin], HORIZON, temperature_C=temp)
    assert fc.method == "ar1"
    direct = _fit_directly(np.log(chl[: origin + 1]), temp[: origin + 1])
    prediction = direct.get_forecast(HORIZON, exog=np.full((HORIZON, 1), temp[origin]))   # last temperature held
    z = _log_members(fc)
    np.testing.assert_allclose(z.mean(axis=0), prediction.predicted_mean, atol=1e-8)
    assert direct.mle_retvals["converged"] or "converge" in fc.note   # the stop is reported, not hidden
    # members at normal quantiles: the spread between two members is sd·(Φ⁻¹(q_hi) − Φ⁻¹(q_lo)) (scipy)
    M = z.shape[0]
    width = stats.norm.ppf((M - 0.5) / M) - stats.norm.ppf(0.5 / M)
    np.testing.assert_allclose((z[-1] - z[0]) / width, np.sqrt(prediction.var_pred_mean), rtol=1e-8)
    np.testing.assert_array_equal(fc.valid_day_d, days[origin] + np.arange(1, HORIZON + 1))


def test_ar1_baseline_without_temperature_and_with_a_temperature_forecast_matches_statsmodels():
    days, chl, temp = _lake_series(seed=2)
    origin = 450
    z = np.log(chl[: origin + 1])
    plain = bl.ar1_forecast(days, chl, days[origin], HORIZON)
    direct = _fit_directly(z)
    np.testing.assert_allclose(_log_members(plain).mean(axis=0), direct.forecast(HORIZON), atol=1e-8)
    future = temp[origin + 1: origin + 1 + HORIZON] + 1.0
    driven = bl.ar1_forecast(days, chl, days[origin], HORIZON, temperature_C=temp, future_temperature_C=future)
    direct = _fit_directly(z, temp[: origin + 1])
    np.testing.assert_allclose(_log_members(driven).mean(axis=0), direct.forecast(HORIZON, exog=future[:, None]),
                               atol=1e-8)


@pytest.mark.parametrize("forecaster", ["persistence", "persistence_ensemble", "climatology", "ar1_forecast"])
def test_no_forecaster_looks_past_the_origin(forecaster):
    days, chl, temp = _lake_series(seed=3)
    origin = 520
    call = getattr(bl, forecaster)
    kwargs = {"temperature_C": temp} if forecaster == "ar1_forecast" else {}
    reference = call(days, chl, days[origin], HORIZON, **{k: v.copy() for k, v in kwargs.items()})
    rng = np.random.default_rng(4)
    for _ in range(3):
        chl2 = chl.copy()
        chl2[origin + 1:] = rng.gamma(1.0, 50.0, size=chl.size - origin - 1)
        chl2[origin + 1 + rng.integers(0, 100, size=20)] = np.nan
        changed = {k: np.where(np.arange(v.size) > origin, v + rng.normal(0, 5, v.size), v) for k, v in kwargs.items()}
        again = call(days, chl2, days[origin], HORIZON, **changed)
        assert again.members_ugL.tobytes() == reference.members_ugL.tobytes()
        assert again.method == reference.method and again.note == reference.note
    cut = call(days[: origin + 1], chl[: origin + 1], days[origin], HORIZON,
               **{k: v[: origin + 1] for k, v in kwargs.items()})
    assert cut.members_ugL.tobytes() == reference.members_ugL.tobytes()


def test_persistence_repeats_the_last_observed_value():
    days, chl, _ = _lake_series(seed=5)
    chl[195:201] = np.nan
    fc = bl.persistence(days, chl, days[200], 4)
    last = chl[np.flatnonzero(np.isfinite(chl[:201]))[-1]]
    np.testing.assert_array_equal(fc.members_ugL, np.full((1, 4), last))


def test_persistence_ensemble_without_history_is_the_documented_prior():
    days = DAY0 + np.arange(5, dtype=float)
    chl = np.array([np.nan, 8.0, np.nan, np.nan, np.nan])    # one value, 3 days before the origin
    fc = bl.persistence_ensemble(days, chl, days[-1], 3, members=40)
    positions = (np.arange(1, 41) - 0.5) / 40
    for h in (1, 2, 3):
        lag = h + 3
        # prior: log change N(0, (0.15·sqrt(lag))²) at the members' plotting positions (scipy quantiles)
        expected = np.log(8.0) + 0.15 * np.sqrt(lag) * stats.norm.ppf(positions)
        np.testing.assert_allclose(np.log(fc.members_ugL[:, h - 1]), expected, atol=1e-12)
    assert "prior mixed in at leads [1, 2, 3]" in fc.note


def test_persistence_ensemble_mixes_in_the_prior_in_proportion_to_the_missing_pairs():
    days = DAY0 + np.arange(10, dtype=float)
    chl = np.full(10, 5.0)                  # 9 pairs at lag 1, all with log change 0
    fc = bl.persistence_ensemble(days, chl, days[-1], 1, members=60, min_pairs=30)
    # round(60·9/30) = 18 members from the data (no change), 42 from the prior (none exactly 0)
    assert np.sum(np.isclose(fc.members_ugL[:, 0], 5.0, rtol=1e-12, atol=0)) == 18
    np.testing.assert_array_equal(np.diff(fc.members_ugL[:, 0]) >= 0, True)


def test_persistence_ensemble_spread_follows_a_random_walk_history():
    # log chlorophyll-a as a random walk with sd 0.1 per day: log change over L days has sd 0.1·sqrt(L)
    rng = np.random.default_rng(6)
    n = 3000
    chl = np.exp(2.0 + np.cumsum(rng.normal(0, 0.1, n)))
    days = DAY0 + np.arange(n, dtype=float)
    fc = bl.persistence_ensemble(days, chl, days[-1], 9)
    assert fc.note == ""
    z = np.log(fc.members_ugL)
    for lag in (1, 4, 9):
        assert z[:, lag - 1].std() == pytest.approx(0.1 * np.sqrt(lag), rel=0.1)
        assert np.median(z[:, lag - 1]) == pytest.approx(np.log(chl[-1]), abs=0.05 * np.sqrt(lag))


def test_climatology_draws_on_the_same_season_of_previous_years_only():
    days, chl, _ = _lake_series(seed=7)
    first_year = bl.climatology(days, chl, days[200], HORIZON)
    assert np.isnan(first_year.members_ugL).all() and "no climatology" in first_year.note
    origin = 560                      # 2024-07-14; valid days 2024-07-15 .. 07-24
    fc = bl.climatology(days, chl, days[origin], HORIZON)
    assert fc.note == "" and fc.members_ugL.shape == (bl.MEMBERS, HORIZON)
    dates = (days.astype("int64")).astype("datetime64[D]")
    for k, v in enumerate(fc.valid_day_d):
        valid = np.datetime64(int(v), "D")
        # the window around the same calendar date a year before: 2023-07-xx ± 15 days
        centre = valid - np.timedelta64(366, "D")                     # 2024 is a leap year
        window = (dates >= centre - np.timedelta64(15, "D")) & (dates <= centre + np.timedelta64(15, "D"))
        sample = chl[window & np.isfinite(chl)]
        assert sample.min() <= fc.members_ugL[:, k].min() and fc.members_ugL[:, k].max() <= sample.max()
        assert np.median(fc.members_ugL[:, k]) == pytest.approx(np.median(sample), rel=0.05)


def test_ar1_falls_back_to_the_persistence_ensemble_on_a_short_history():
    days, chl, temp = _lake_series(seed=8)
    fc = bl.ar1_forecast(days, chl, days[20], HORIZON, temperature_C=temp)
    assert fc.method == "persistence_ensemble"
    assert "fewer than 30" in fc.note
    expected = bl.persistence_ensemble(days, chl, days[20], HORIZON)
    np.testing.assert_array_equal(fc.members_ugL, expected.members_ugL)


def test_baselines_reject_bad_input():
    days, chl, temp = _lake_series(seed=9)
    with pytest.raises(ValueError, match="no observed chlorophyll-a at or before the origin"):
        bl.persistence(days, np.full(days.size, np.nan), days[100], 3)
    with pytest.raises(ValueError, match="whole number of days from origin_d"):
        bl.persistence(days, chl, days[100] + 0.5, 3)
    with pytest.raises(ValueError, match="chl_ugL must be >= 0"):
        bl.persistence(days, -chl, days[100], 3)
    with pytest.raises(ValueError, match="future_temperature_C needs the temperature history"):
        bl.ar1_forecast(days, chl, days[100], 3, future_temperature_C=np.ones(3))
    with pytest.raises(ValueError, match="future_temperature_C must be finite with shape"):
        bl.ar1_forecast(days, chl, days[100], 3, temperature_C=temp, future_temperature_C=np.ones(2))


def test_ar1_with_earlier_parameters_filters_the_new_series_as_statsmodels_does():
    # statsmodels' own SARIMAX.filter with the given parameters is the reference
    rng = np.random.default_rng(11)
    days = np.arange(19500.0, 19580.0)
    z = np.empty(days.size)
    z[0] = 1.0
    for k in range(1, days.size):
        z[k] = 0.3 + 0.7 * z[k - 1] + rng.normal(0, 0.2)
    chl = np.exp(z)
    earlier = bl.ar1_forecast(days[:60], chl[:60], days[59], 5)
    later = bl.ar1_forecast(days, chl, days[-1], 5, params=earlier.params)
    direct = SARIMAX(np.log(chl), order=(1, 0, 0), trend="c").filter(earlier.params).get_forecast(5)
    # members sit at symmetric normal quantiles of the log forecast, so their log mean is its mean
    assert np.allclose(np.log(later.members_ugL).mean(axis=0), direct.predicted_mean, atol=1e-8)
    assert np.array_equal(later.params, earlier.params)
