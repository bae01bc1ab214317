"""Model drivers from the store: observed for the analysis window, forecast for the horizon.

Observed drivers are the stored readings resampled to hourly (pandas):
water temperature per basin from its buoy, shortwave radiation from the
water body's weather station, discharge and inflow concentrations from the
inflow gauges. Forecast drivers use the newest weather forecast issued at or
before the analysis time; without one, the last two weeks' mean daily cycle
(a persistence climatology). Water temperature over the horizon relaxes
from the last observed value toward the air temperature plus the recent
water–air difference, with a time constant growing with depth (an
equilibrium-temperature model; Edinger, Duttweiler & Geyer 1968, Water
Resour. Res. 4:1137).
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

import numpy as np
import pandas as pd

from assimilation.solar import clear_sky_shortwave_W_m2
from assimilation.spec import Drivers
from monitor.config import Config, WaterBodyConfig
from monitor.timeutil import to_epoch_days

HOUR = pd.Timedelta(hours=1)

#: Time scale [d] over which a water body's own recent water temperature relaxes toward its
#: climatology when no weather feed gives an air temperature (common practice: surface water
#: temperature anomalies of lakes persist for one to a few weeks).
CLIMATOLOGY_RELAXATION_D = 10.0

#: Used only when a water body has no reading at all of a driver.
FALLBACK = {
    "water_temperature": 15.0,     # [°C]
    "shortwave_radiation": 180.0,  # [W/m²] daily mean, mid-latitude summer (common practice)
    "air_temperature": 15.0,       # [°C]
    "discharge": 0.5,              # [m³/s]
    "nitrate": 500.0,              # [µg N/L]
    "srp": 10.0,                   # [µg P/L]
}


@dataclass(frozen=True)
class DriverSources:
    """Which stations feed which driver of a water body."""

    temperature_stations: tuple[str | None, ...]  # per basin
    weather_station: str | None
    gauges: tuple[str, ...]                        # per inflow


def driver_sources(config: Config, wb: WaterBodyConfig) -> DriverSources:
    temps = []
    for basin in wb.basins:
        st = [s.id for s in config.stations_of(wb.id, basin=basin.id, variable="water_temperature")]
        temps.append(st[0] if st else None)
    return DriverSources(tuple(temps), wb.weather_station, tuple(i.gauge for i in wb.inflows))


class StationSeries:
    """QC-passed readings of a water body's stations, split once by (station, variable)."""

    def __init__(self, frame: pd.DataFrame):
        self._series: dict[tuple[str, str], pd.Series] = {}
        if not frame.empty:
            passed = frame[frame.qc_flag <= 1]
            for key, group in passed.groupby(["station_id", "variable"], sort=False):
                self._series[key] = group.set_index("time_utc")["value"].sort_index()
        self._daily: dict[tuple[str, str], pd.Series] = {}

    def get(self, station: str | None, variable: str) -> pd.Series:
        if station is None:
            return pd.Series(dtype=float)
        return self._series.get((station, variable), pd.Series(dtype=float))

    def daily_mean(self, station: str | None, variable: str) -> pd.Series:
        key = (station, variable)
        if key not in self._daily:
            s = self.get(station, variable)
            self._daily[key] = s.resample("1D").mean().dropna() if len(s) else s
        return self._daily[key]

    def hourly(self, station: str | None, variable: str, index: pd.DatetimeIndex, fallback: float) -> np.ndarray:
        """One station's variable on an hourly index: hourly means, interpolated, ends held."""
        s = self.get(station, variable)
        if s.empty:
            return np.full(len(index), fallback)
        s = s.resample("1h").mean()
        s = s.reindex(s.index.union(index)).interpolate(method="time", limit_direction="both")
        return s.reindex(index).to_numpy(dtype=float)


def driver_stations(config: Config, wb: WaterBodyConfig) -> list[str]:
    src = driver_sources(config, wb)
    return [s for s in (*src.temperature_stations, src.weather_station, *src.gauges) if s]


def _substitute_shortwave(wb: WaterBodyConfig, index: pd.DatetimeIndex, notes: list[str] | None) -> np.ndarray:
    """Shortwave where no reading or forecast exists: clear-sky astronomy at the water body's
    latitude with a climatological sunshine fraction, else a constant; the substitution is noted."""
    if wb.latitude_deg is not None:
        _note(notes, f"shortwave from clear-sky astronomy at {wb.latitude_deg:g}° with a climatological cloud factor")
        return clear_sky_shortwave_W_m2(np.asarray(to_epoch_days(index)), wb.latitude_deg, wb.longitude_deg or 0.0)
    _note(notes, f"shortwave a constant {FALLBACK['shortwave_radiation']:g} W/m² (no weather feed, no latitude)")
    return np.full(len(index), FALLBACK["shortwave_radiation"])


def _note(notes: list[str] | None, text: str) -> None:
    if notes is not None and text not in notes:
        notes.append(text)


def observed_drivers(series: StationSeries, config: Config, wb: WaterBodyConfig, start: dt.datetime,
                     end: dt.datetime, notes: list[str] | None = None) -> Drivers:
    """Hourly drivers from ``start`` to ``end`` (aware UTC) from QC-passed readings.

    ``series`` should hold a few days before ``start`` too, so gaps at the
    start are bridged. Drivers substituted for missing readings are named in ``notes``.
    """
    src = driver_sources(config, wb)
    index = pd.date_range(start, end, freq="1h")
    if index[-1] < pd.Timestamp(end):
        index = index.append(pd.DatetimeIndex([pd.Timestamp(end)]))
    temps = np.column_stack([series.hourly(s, "water_temperature", index, FALLBACK["water_temperature"])
                             for s in src.temperature_stations])
    light = (series.hourly(src.weather_station, "shortwave_radiation", index, FALLBACK["shortwave_radiation"])
             if not series.get(src.weather_station, "shortwave_radiation").empty
             else _substitute_shortwave(wb, index, notes))
    cols = {v: [np.clip(series.hourly(g, v, index, FALLBACK[v]), 0.0, None) for g in src.gauges]
            for v in ("discharge", "nitrate", "srp")}
    q, n, p = (np.column_stack(cols[v]) if cols[v] else np.zeros((len(index), 0))
               for v in ("discharge", "nitrate", "srp"))
    return Drivers(time_d=np.asarray(to_epoch_days(index)), water_temperature_C=temps,
                   shortwave_W_m2=np.clip(light, 0.0, None), inflow_m3_s=q,
                   inflow_nitrogen_ugL=n, inflow_phosphorus_ugL=p)


def forecast_drivers(series: StationSeries, weather_forecast: pd.DataFrame, config: Config, wb: WaterBodyConfig,
                     analysis: dt.datetime, horizon_days: int, *,
                     temperature_offsets_C: tuple[float, ...] = (0.0,),
                     temperature_climatology_C: dict[str, float] | None = None,
                     notes: list[str] | None = None) -> list[Drivers]:
    """Hourly drivers from ``analysis`` to ``analysis + horizon_days``, one per scenario.

    ``series`` holds the last two weeks of readings; ``weather_forecast`` the
    newest forecast issued at or before ``analysis`` (columns variable,
    valid_utc, value; may be empty). Each entry of ``temperature_offsets_C``
    shifts the air-temperature outlook (and so the water temperature) for
    one driver scenario of the forecast ensemble [°C].

    Without any air temperature (no weather feed), each basin's water
    temperature starts from its last daily mean and relaxes toward its
    climatology for the season (``temperature_climatology_C``, from earlier
    years) over ``CLIMATOLOGY_RELAXATION_D``, or is held where there is no
    earlier year; the offsets then shift it directly. Substitutions are named
    in ``notes``.
    """
    src = driver_sources(config, wb)
    index = pd.date_range(analysis, analysis + dt.timedelta(days=horizon_days), freq="1h")
    weather = _weather_outlook(series, weather_forecast, src.weather_station, index)
    if weather["shortwave_radiation"] is None:
        weather["shortwave_radiation"] = _substitute_shortwave(wb, index, notes)
    light = np.clip(weather["shortwave_radiation"], 0.0, None)
    past_air = series.daily_mean(src.weather_station, "air_temperature")
    start_temps, offsets, taus = [], [], []
    for basin, st in zip(wb.basins, src.temperature_stations):
        water = series.daily_mean(st, "water_temperature")
        start_temps.append(float(water.iloc[-1]) if len(water) else FALLBACK["water_temperature"])
        both = pd.DataFrame({"w": water, "a": past_air.reindex(water.index)}).dropna().tail(7)
        offsets.append(float((both.w - both.a).mean()) if len(both) else 0.0)
        taus.append(surface_relaxation_days(basin.mean_depth_m))
    persist = {v: [max(float(d.iloc[-1]), 0.0) if len(d := series.daily_mean(g, v)) else FALLBACK[v]
                   for g in src.gauges] for v in ("discharge", "nitrate", "srp")}
    q, n, p = (np.tile(np.asarray(persist[v], dtype=float), (len(index), 1)) for v in ("discharge", "nitrate", "srp"))
    out = []
    if weather["air_temperature"] is None:
        climatology = temperature_climatology_C or {}
        target = np.array([climatology.get(b.id, s) for b, s in zip(wb.basins, start_temps)])
        _note(notes, "water temperature from the recent readings, "
              + ("relaxing toward its seasonal climatology" if climatology else "held (no earlier year)")
              + " (no air temperature from a weather feed)")
    for shift in temperature_offsets_C:
        if weather["air_temperature"] is None:
            temps = _relax(np.asarray(start_temps), np.tile(target, (len(index), 1)),
                           np.full(len(start_temps), CLIMATOLOGY_RELAXATION_D), 1.0 / 24.0) + shift
            out.append(Drivers(time_d=np.asarray(to_epoch_days(index)), water_temperature_C=temps,
                               shortwave_W_m2=light, inflow_m3_s=q, inflow_nitrogen_ugL=n, inflow_phosphorus_ugL=p))
            continue
        air_daily = pd.Series(weather["air_temperature"] + shift, index=index).rolling(24, min_periods=1).mean()
        temps = _relax(np.asarray(start_temps), air_daily.to_numpy()[:, None] + np.asarray(offsets),
                       np.asarray(taus), 1.0 / 24.0)
        out.append(Drivers(time_d=np.asarray(to_epoch_days(index)), water_temperature_C=temps,
                           shortwave_W_m2=light, inflow_m3_s=q, inflow_nitrogen_ugL=n, inflow_phosphorus_ugL=p))
    return out


def surface_relaxation_days(mean_depth_m: float) -> float:
    """Time constant [d] with which a basin's water temperature relaxes toward the equilibrium
    temperature through surface heat exchange, for its mean depth [m]: about 1.5 d per 4 m
    (common practice; Edinger, Duttweiler & Geyer 1968)."""
    return 1.5 * max(mean_depth_m, 1.0) / 4.0


def _relax(start: np.ndarray, equilibrium: np.ndarray, tau_d: np.ndarray, dt_d: float) -> np.ndarray:
    """Water temperature relaxing toward the equilibrium temperature: dT/dt = (Te − T)/tau. [°C]"""
    temps = np.empty_like(equilibrium)
    temps[0] = start
    decay = np.exp(-dt_d / tau_d)
    for k in range(1, equilibrium.shape[0]):
        temps[k] = equilibrium[k] + (temps[k - 1] - equilibrium[k]) * decay
    return temps


def _weather_outlook(series: StationSeries, fc: pd.DataFrame, station, index) -> dict[str, np.ndarray | None]:
    """Air temperature and shortwave over ``index``: the issued forecast, else a persistence
    climatology of the station's last two weeks, else None (no weather at all)."""
    out = {}
    for variable in ("air_temperature", "shortwave_radiation"):
        sel = fc[fc.variable == variable] if not fc.empty else fc
        if not sel.empty and sel.valid_utc.max() >= index[-1] - HOUR:
            s = sel.set_index("valid_utc")["value"].sort_index()
            s = s[~s.index.duplicated()]
            s = s.reindex(s.index.union(index)).interpolate(method="time", limit_direction="both")
            out[variable] = s.reindex(index).to_numpy(dtype=float)
            continue
        hist = series.get(station, variable)
        if hist.empty:
            out[variable] = None
            continue
        by_hour = hist.groupby(hist.index.hour).mean()
        out[variable] = by_hour.reindex(range(24)).interpolate(limit_direction="both").to_numpy()[index.hour]
    return out
