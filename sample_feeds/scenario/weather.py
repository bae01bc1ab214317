"""Truth weather at MET-01, storms, the 7-day forecasts and the 15-minute model forcing."""
from __future__ import annotations

import numpy as np
import pandas as pd

from .randomness import ar1
from .setting import FORECAST_HOURS, LATITUDE_DEG, LOCAL_OFFSET, LONGITUDE_DEG, STEP_MIN


def clear_sky_shortwave(times_utc: pd.DatetimeIndex) -> np.ndarray:
    """Clear-sky global horizontal irradiance [W/m²] at the given UTC times.

    Haurwitz (1945), J. Meteor. 2:1: G = 1098 cos Z exp(-0.057 / cos Z), with the
    solar zenith angle from the declination of Cooper (1969), Solar Energy 12:333.
    """
    doy = times_utc.day_of_year.to_numpy(float)
    hour = (times_utc.hour + times_utc.minute / 60.0).to_numpy(float)
    decl = np.radians(23.45) * np.sin(2 * np.pi * (284 + doy) / 365.0)
    hour_angle = np.radians(15.0 * (hour + LONGITUDE_DEG / 15.0 - 12.0))
    lat = np.radians(LATITUDE_DEG)
    cos_z = np.sin(lat) * np.sin(decl) + np.cos(lat) * np.cos(decl) * np.cos(hour_angle)
    cos_z = np.clip(cos_z, 0.0, None)
    with np.errstate(divide="ignore"):
        g = np.where(cos_z > 0.01, 1098.0 * cos_z * np.exp(-0.057 / np.maximum(cos_z, 1e-3)), 0.0)
    return g


def storm_days(rng: np.random.Generator) -> list[tuple[float, float]]:
    """Storm events as (day since season start [d], magnitude [-]).

    One storm is drawn inside each window; the late-August window is kept
    free (a calm warm spell), the late-September storm is the strongest.
    """
    windows = [(6, 18, 0.8, 1.3), (27, 44, 0.6, 1.0), (52, 64, 0.5, 0.9),
               (82, 90, 0.3, 0.5), (138, 146, 1.2, 1.6), (158, 166, 0.8, 1.2),
               (172, 180, 0.6, 1.0)]
    return [(float(rng.uniform(a, b)), float(rng.uniform(m0, m1))) for a, b, m0, m1 in windows]


def make_weather(rng: np.random.Generator, storms, n_hours: int, t0_utc: pd.Timestamp) -> pd.DataFrame:
    """Hourly truth weather from t0_utc for n_hours.

    Columns: time_utc, air_temp_c [°C], shortwave_wm2 [W/m²], wind_ms [m/s],
    cloud [0..1] and clear (clear-sky shortwave [W/m²]). Cloud cover reduces
    shortwave by Kasten & Czeplak (1980), Solar Energy 24:177.
    """
    times = pd.date_range(t0_utc, periods=n_hours, freq="h")
    day = (times - t0_utc).total_seconds().to_numpy() / 86400.0
    doy = times.day_of_year.to_numpy(float) + times.hour.to_numpy() / 24.0
    hour_local = ((times + LOCAL_OFFSET).hour).to_numpy(float)

    # storm signal: quick rise, ~2-day decay
    storm = np.zeros(n_hours)
    for d0, mag in storms:
        dt = day - d0
        storm += mag * np.where(dt >= 0, np.exp(-dt / 1.2), np.exp(dt / 0.3))
    # a warm, calm, sunny spell from mid-July to late August (smooth bump)
    warm = np.exp(-0.5 * ((day - 100.0) / 16.0) ** 2)

    t_clim = 10.0 + 8.0 * np.cos(2 * np.pi * (doy - 205.0) / 365.0)
    synoptic = ar1(rng, n_hours, np.exp(-1.0 / 96.0), 2.4)      # ~4-day memory
    cloud = 1.0 / (1.0 + np.exp(-(ar1(rng, n_hours, np.exp(-1.0 / 30.0), 1.4)
                                  + 2.2 * storm - 1.3 * warm + 1.1)))
    cloud = np.clip(cloud + rng.normal(0, 0.06, n_hours), 0.0, 1.0)
    clear = clear_sky_shortwave(times)
    # Kasten & Czeplak (1980), Solar Energy 24:177: G = G_clear (1 - 0.75 C^3.4)
    shortwave = clear * (1.0 - 0.75 * cloud ** 3.4)
    diurnal_amp = 3.0 + 3.0 * (1.0 - cloud)
    air = (t_clim + synoptic + 2.6 * warm - 2.5 * storm
           + diurnal_amp * np.cos(2 * np.pi * (hour_local - 15.0) / 24.0)
           + rng.normal(0, 0.3, n_hours))
    log_wind = (np.log(3.0) + ar1(rng, n_hours, np.exp(-1.0 / 36.0), 0.38)
                + 0.6 * np.tanh(storm) - 0.45 * warm
                + 0.25 * np.cos(2 * np.pi * (hour_local - 15.0) / 24.0))
    wind = np.clip(np.exp(log_wind + rng.normal(0, 0.12, n_hours)), 0.2, 20.0)
    return pd.DataFrame({"time_utc": times, "air_temp_c": air, "shortwave_wm2": shortwave,
                         "wind_ms": wind, "cloud": cloud, "clear": clear})


def weather_at_steps(weather: pd.DataFrame, n_steps: int) -> dict[str, np.ndarray]:
    """15-minute model forcing by linear interpolation of the hourly weather.

    Returns ``air`` [°C], ``sw`` [W/m²] and ``wind`` [m/s], each of length n_steps,
    starting at the first hour of ``weather``.
    """
    hours = np.arange(len(weather), dtype=float)
    t_h = np.arange(n_steps) / (60 // STEP_MIN)
    return {k: np.interp(t_h, hours, weather[c].to_numpy())
            for k, c in (("air", "air_temp_c"), ("sw", "shortwave_wm2"), ("wind", "wind_ms"))}


def make_forecasts(rng: np.random.Generator, weather: pd.DataFrame, issues_utc: pd.DatetimeIndex) -> pd.DataFrame:
    """7-day hourly forecasts issued at the given UTC times: truth + lead-growing error.

    Air temperature: bias +0.3 °C, error sd 0.7 + 0.45·lead[d] °C (smooth in lead time).
    Shortwave: the cloud fraction relaxes towards its climatology with lead time plus noise.
    Wind: multiplicative error sd 12 % + 6 %·lead[d], and relaxes towards 3 m/s.
    Columns: issued_utc, valid_utc, air_temp_c [°C], shortwave_wm2 [W/m²], wind_ms [m/s].
    """
    index = pd.Index(weather["time_utc"])
    lead_h = np.arange(1, FORECAST_HOURS + 1)
    lead_d = lead_h / 24.0
    phi = np.exp(-1.0 / 18.0)
    frames = []
    cloud_clim = float(weather["cloud"].mean())
    for issued in issues_utc:
        k0 = index.get_loc(issued)
        sl = slice(k0 + 1, k0 + 1 + FORECAST_HOURS)
        truth = weather.iloc[sl]
        z = ar1(rng, 3 * FORECAST_HOURS, phi, 1.0).reshape(3, FORECAST_HOURS)
        air = truth["air_temp_c"].to_numpy() + 0.3 + (0.7 + 0.45 * lead_d) * z[0]
        w = np.exp(-lead_d / 3.0)
        cloud = np.clip(w * truth["cloud"].to_numpy() + (1 - w) * cloud_clim
                        + (0.05 + 0.05 * lead_d) * z[1], 0.0, 1.0)
        sw = truth["clear"].to_numpy() * (1.0 - 0.75 * cloud ** 3.4)
        wind_truth = truth["wind_ms"].to_numpy()
        wind = np.exp(w * np.log(wind_truth) + (1 - w) * np.log(3.0)
                      + (0.12 + 0.06 * lead_d) * z[2])
        frames.append(pd.DataFrame({"issued_utc": issued, "valid_utc": truth["time_utc"].to_numpy(),
                                    "air_temp_c": air, "shortwave_wm2": sw, "wind_ms": wind}))
    return pd.concat(frames, ignore_index=True)
