"""Baseline forecasters against statsmodels, scipy and their own documented definitions.

References: statsmodels ``AutoReg`` and ``OLS`` (Seabold and Perktold 2010,
Proc. 9th Python in Science Conf.) fitted directly on the same series;
scipy ``stats.norm.ppf`` for the normal quantiles. The series are invented
and seeded.
"""
import numpy as np
import pytest
from scipy import stats
from statsmodels.regression.linear_model import OLS
from statsmodels.tsa.ar_model import AutoReg

from assimilation import baselines as bl

DAY0 = 19_358.0   # 2023-01-01 in epoch days
HORIZON = 10


def _temperature(rng, n):
    """Daily water temperature [°C]: a seasonal cycle with day-to-day noise."""
    t = np.arange(n, dtype=float)
    return 14.0 + 9.0 * np.sin(2 * np.pi * (t - 110) / 365.25) + rng.normal(0, 0.5, n)


def _lake_series(seed=1, n=760):
    """Daily chlorophyll-a [µg/L] with a seasonal cycle, AR(1) noise and a temperature effect; gaps as NaN."""
    rng = np.random.default_rng(seed)
    temperature = _temperature(rng, n)
    noise = np.zeros(n)
    for k in range(1, n):
        noise[k] = 0.8 * noise[k - 1] + rng.normal(0, 0.2)
    chl = np.exp(0.5 + 0.08 * temperature + noise)
    chl[rng.random(n) < 0.25] = np.nan       # a quarter of the days missing
    chl[300:320] = np.nan                      # and a three-week gap
    chl[0] = np.exp(1.0)                       # first day observed
    return DAY0 + np.arange(n, dtype=float), chl, temperature


def _simulated_ar1(seed, n, c, phi, beta, sigma):
    """log chlorophyll-a z_t = c + phi·z_{t−1} + beta·T_t + N(0, sigma²), started at its mean; T [°C]."""
    rng = np.random.default_rng(seed)
    temperature = _temperature(rng, n)
    z = np.empty(n)
    z[0] = (c + beta * temperature.mean()) / (1 - phi)
    for k in range(1, n):
        z[k] = c + phi * z[k - 1] + beta * temperature[k] + rng.normal(0, sigma)
    return DAY0 + np.arange(n, dtype=float), z, temperature


def _pairs_ols(z, temperature):
    """statsmodels OLS of z_t on (1, z_{t−1}, T_t) over the consecutive observed days."""
    ok = np.isfinite(z[1:]) & np.isfinite(z[:-1])
    design = np.column_stack([np.ones(z.size - 1), z[:-1], temperature[1:]])[ok]
    return OLS(z[1:][ok], design).fit()


def _log_members(forecast):
    return np.log(forecast.members_ugL)


def _spread_width(m):
    """Φ⁻¹((M − 0.5)/M) − Φ⁻¹(0.5/M) (scipy): the distance of the outer members in sd units."""
    return stats.norm.ppf((m - 0.5) / m) - stats.norm.ppf(0.5 / m)


def _coefficients_from_leads(forecast, z_last, future):
    """(c, phi, beta) and sigma solved from the means and spread of leads 1..3 of a forecast whose
    origin is an observed day: m_h = c + phi·m_{h−1} + beta·T_h with m_0 = z_last, and sd_1 = sigma."""
    z = _log_members(forecast)
    mean = z.mean(axis=0)          # members sit at symmetric normal quantiles: their mean is m_h
    previous = np.concatenate([[z_last], mean[:2]])
    c, phi, beta = np.linalg.solve(np.column_stack([np.ones(3), previous, future[:3]]), mean[:3])
    return np.array([c, phi, beta]), (z[-1, 0] - z[0, 0]) / _spread_width(z.shape[0])


def _assert_matches_autoreg(fc, z, temp, origin, order):
    """Reference: statsmodels AutoReg fitted by OLS on the same lags, its dynamic forecast with the last
    temperature held and its prediction variance (AutoReg's sigma2 = SSR/n; Bloomline's the OLS scale
    SSR/(n − k))."""
    direct = AutoReg(z[: origin + 1], lags=order, trend="c", exog=temp[: origin + 1]).fit()
    held = np.full((HORIZON, 1), temp[origin])
    log_members = _log_members(fc)
    np.testing.assert_allclose(log_members.mean(axis=0), direct.forecast(HORIZON, exog=held), atol=1e-8)
    prediction = direct.get_prediction(start=origin + 1, end=origin + HORIZON, exog_oos=held)
    sd = np.sqrt(prediction.var_pred_mean * direct.nobs / (direct.nobs - direct.params.size))
    np.testing.assert_allclose((log_members[-1] - log_members[0]) / _spread_width(log_members.shape[0]), sd,
                               rtol=1e-8)


def test_ar1_on_a_gap_free_series_matches_statsmodels_autoreg():
    days, z, temp = _simulated_ar1(seed=1, n=600, c=0.4, phi=0.7, beta=0.04, sigma=0.25)
    origin = 500
    fc = bl.ar1_forecast(days, np.exp(z), days[origin], HORIZON, temperature_C=temp)
    assert fc.method == "ar1" and fc.note == ""
    np.testing.assert_array_equal(fc.valid_day_d, days[origin] + np.arange(1, HORIZON + 1))
    _assert_matches_autoreg(fc, z, temp, origin, 1)


@pytest.mark.parametrize("order", [2, 3])
def test_ar_of_higher_order_on_a_gap_free_series_matches_statsmodels_autoreg(order):
    days, z, temp = _simulated_ar1(seed=11, n=600, c=0.4, phi=0.7, beta=0.04, sigma=0.25)
    origin = 500
    fc = bl.ar_forecast(days, np.exp(z), days[origin], HORIZON, order=order, temperature_C=temp)
    assert fc.method == f"ar{order}"
    _assert_matches_autoreg(fc, z, temp, origin, order)


def test_the_order_average_is_the_quantile_average_of_the_orders():
    days, z, temp = _simulated_ar1(seed=12, n=300, c=0.4, phi=0.7, beta=0.04, sigma=0.25)
    origin = 250
    each = [_log_members(bl.ar_forecast(days, np.exp(z), days[origin], HORIZON, order=p, temperature_C=temp))
            for p in bl.AVERAGED_ORDERS]
    avg = bl.ar_average_forecast(days, np.exp(z), days[origin], HORIZON, temperature_C=temp)
    assert avg.method == "ar_average"
    np.testing.assert_allclose(_log_members(avg), np.mean(each, axis=0), atol=1e-10)


def test_ar1_on_a_gap_free_series_without_temperature_and_with_a_temperature_forecast_matches_autoreg():
    days, z, temp = _simulated_ar1(seed=2, n=400, c=0.2, phi=0.6, beta=0.05, sigma=0.3)
    origin = 350
    plain = bl.ar1_forecast(days, np.exp(z), days[origin], HORIZON)
    direct = AutoReg(z[: origin + 1], lags=1, trend="c").fit()          # statsmodels AutoReg
    np.testing.assert_allclose(_log_members(plain).mean(axis=0), direct.forecast(HORIZON), atol=1e-8)
    future = temp[origin + 1: origin + 1 + HORIZON] + 1.0
    driven = bl.ar1_forecast(days, np.exp(z), days[origin], HORIZON, temperature_C=temp, future_temperature_C=future)
    direct = AutoReg(z[: origin + 1], lags=1, trend="c", exog=temp[: origin + 1]).fit()   # statsmodels AutoReg
    np.testing.assert_allclose(_log_members(driven).mean(axis=0), direct.forecast(HORIZON, exog=future[:, None]),
                               atol=1e-8)


def test_ar1_on_a_series_with_gaps_has_the_least_squares_coefficients_of_the_consecutive_pairs():
    days, chl, temp = _lake_series()
    temp[[40, 41, 42, 250, 480]] = np.nan       # temperature gaps, filled by linear interpolation in time
    origin = int(np.flatnonzero(np.isfinite(chl[:501]))[-1])
    z = np.log(chl[: origin + 1])
    t = np.arange(origin + 1, dtype=float)
    seen = np.isfinite(temp[: origin + 1])
    filled = np.interp(t, t[seen], temp[: origin + 1][seen])
    direct = _pairs_ols(z, filled)               # statsmodels OLS on the consecutive observed days
    future = np.array([10.0, 20.0, 5.0])
    fc = bl.ar1_forecast(days, chl, days[origin], 3, temperature_C=temp, future_temperature_C=future)
    coefficients, sigma = _coefficients_from_leads(fc, z[-1], future)
    np.testing.assert_allclose(coefficients, direct.params, rtol=1e-7)
    assert sigma == pytest.approx(np.sqrt(direct.scale), rel=1e-8)

    # an origin two days after the last value: the same fit, k = h + 2 steps from it
    later = days[origin] + 2
    chl_later = np.concatenate([chl[: origin + 1], [np.nan, np.nan]])
    temp_later = np.concatenate([temp[: origin + 1], [temp[origin] + 3.0, np.nan]])
    fc = bl.ar1_forecast(days[: origin + 3], chl_later, later, 3, temperature_C=temp_later)
    c, phi, beta = direct.params
    held = temp[origin] + 3.0                   # the last observed temperature, for the gap days and the leads
    m, mean = z[-1], []
    for _ in range(5):
        m = c + phi * m + beta * held
        mean.append(m)
    k = np.arange(3, 6)
    sd = np.sqrt(direct.scale * np.array([np.sum(phi ** (2 * np.arange(j))) for j in k]))
    log_members = _log_members(fc)
    np.testing.assert_allclose(log_members.mean(axis=0), mean[2:], atol=1e-8)
    np.testing.assert_allclose((log_members[-1] - log_members[0]) / _spread_width(log_members.shape[0]), sd,
                               rtol=1e-8)


def test_ar1_recovers_a_simulated_autoregression_within_a_few_standard_errors():
    truth = np.array([0.4, 0.8, 0.03])           # c, phi, beta
    sigma = 0.2
    days, z, temp = _simulated_ar1(seed=12, n=2000, c=truth[0], phi=truth[1], beta=truth[2], sigma=sigma)
    missing = np.random.default_rng(13).random(z.size) < 0.15
    missing[[0, -1]] = False                     # first day and origin observed
    z[missing] = np.nan
    future = np.array([12.0, 22.0, 6.0])
    fc = bl.ar1_forecast(days, np.exp(z), days[-1], 3, temperature_C=temp, future_temperature_C=future)
    assert fc.method == "ar1"
    coefficients, sigma_hat = _coefficients_from_leads(fc, z[-1], future)
    se = _pairs_ols(z, temp).bse                 # OLS standard errors (statsmodels) of the same estimator
    assert np.all(np.abs(coefficients - truth) < 4 * se)
    # large-sample sd of the sd of n normal residuals: sigma/sqrt(2n) (from memory)
    n_pairs = _pairs_ols(z, temp).nobs
    assert abs(sigma_hat - sigma) < 4 * sigma / np.sqrt(2 * n_pairs)


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


def test_ar1_falls_back_on_a_non_stationary_fit():
    # an explosive series, z_t = 1.05·z_{t−1} + small noise: the least-squares phi is above 1
    rng = np.random.default_rng(14)
    z = np.empty(80)
    z[0] = 0.2
    for k in range(1, z.size):
        z[k] = 1.05 * z[k - 1] + rng.normal(0, 0.01)
    days = DAY0 + np.arange(z.size, dtype=float)
    fc = bl.ar1_forecast(days, np.exp(z), days[-1], HORIZON)
    assert fc.method == "persistence_ensemble"
    assert "not stationary" in fc.note
    np.testing.assert_array_equal(fc.members_ugL, bl.persistence_ensemble(days, np.exp(z), days[-1], HORIZON).members_ugL)


def test_ar1_falls_back_on_a_singular_design():
    days, chl, _ = _lake_series(seed=15)
    constant = np.full(days.size, 18.0)          # a constant temperature duplicates the intercept
    fc = bl.ar1_forecast(days, chl, days[400], HORIZON, temperature_C=constant)
    assert fc.method == "persistence_ensemble"
    assert "singular" in fc.note
