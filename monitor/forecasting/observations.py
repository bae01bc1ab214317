"""Stored readings of a water body's basins → the filter's :class:`assimilation.observe.Observations`.

What happens to the readings on the way, in order:

1. **One reading per station, variable and time across sources.** The same
   variable at the same station and time from two sources (feeds) is one
   observation: the best-flagged value (QC flag 1 before 3; a censored
   reading, flag 9, last); ties go to the source whose feed comes first in
   the config (``[[feeds]]`` order), then to sources of no configured feed
   in alphabetical order. Assimilating both would count one measurement
   twice and understate its error.
2. **Ammonium joins nitrate in the DIN observation.** The model's
   dissolved inorganic nitrogen is nitrate + nitrite + ammonium; where
   ammonium and nitrate were sampled at the same station and time, the
   ``nitrate`` (DIN) observation is their sum, with the two errors added in
   quadrature. A censored part adds its range: nitrate N with ammonium
   below La is N + La/2 with a further error sd La/2; a censored nitrate
   below Ln with ammonium A is DIN below Ln + A (both censored: below
   Ln + La). Ammonium without nitrate at that time is only a lower bound
   of DIN and is not assimilated; nitrate without ammonium stands for DIN,
   as it always has.
3. **Whole-day values** (``readings.whole_day``, stamped at the end of their
   local day) become time means over that local day of the water body
   (``span_d``: 23, 24 or 25 hours), compared with the members' mean over the day.
4. **Censored readings** (below a detection limit) go to the filter as such,
   with their limit; the filter skips or uses them
   (:func:`assimilation.observe.censored_as_observations`). A censored
   reading without a known limit is left out.

Observation errors: ``[observation_errors]`` per variable, ``max(floor,
fraction · |value|)``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from assimilation.observe import OBSERVABLE_KINDS, Observations
from monitor.config import Config, WaterBodyConfig
from monitor.config.model_setup import chlorophyll_sensors
from monitor.timeutil import to_epoch_days

#: the stored variables the filter's observations are made of (ammonium joins nitrate as DIN)
OBSERVED_VARIABLES = (*OBSERVABLE_KINDS, "ammonium")
_KEY = ["station_id", "variable", "time_utc", "whole_day"]  # a whole-day value is not an instant reading


def one_per_source(frame: pd.DataFrame, config: Config) -> pd.DataFrame:
    """One row per (station, variable, time, whole day or instant): the best QC flag, then the first source by the config's
    feed order (sources of no configured feed after them, alphabetically)."""
    if frame.empty or not frame.duplicated(_KEY).any():
        return frame
    order = {}
    for i, f in enumerate(config.feeds):
        order.setdefault(f.source or f.name, i)
    rank = frame.source.map(order).fillna(len(order)).to_numpy(dtype=float)
    flag = np.where(frame.censored.to_numpy(dtype=bool), 9, frame.qc_flag.to_numpy(dtype=float))
    ranked = frame.assign(_flag=flag, _rank=rank)
    ranked = ranked.sort_values([*_KEY, "_flag", "_rank", "source"], kind="stable")
    kept = ranked.drop_duplicates(_KEY, keep="first").drop(columns=["_flag", "_rank"])
    return kept.sort_values(["time_utc", "station_id", "variable"], kind="stable", ignore_index=True)


def _error_sd(config: Config, variable: str, value: np.ndarray) -> np.ndarray:
    e = config.observation_errors[variable]
    return np.maximum(e.floor, e.fraction * np.abs(value))


def _din(frame: pd.DataFrame, config: Config) -> pd.DataFrame:
    """Nitrate + ammonium sampled together → one DIN (``nitrate``) row; ammonium alone dropped (see module)."""
    amm = frame[frame.variable == "ammonium"]
    rest = frame[frame.variable != "ammonium"]
    if amm.empty:
        return rest
    nit = rest[rest.variable == "nitrate"]
    pair = nit.reset_index().merge(amm[["station_id", "time_utc", "value", "censored", "detection_limit"]],
                                   on=["station_id", "time_utc"], suffixes=("", "_nh4"))
    if pair.empty:
        return rest
    n_cens = pair.censored.to_numpy(dtype=bool)
    a_cens = pair.censored_nh4.to_numpy(dtype=bool)
    n_val = np.where(n_cens, pair.detection_limit, pair.value).astype(float)
    a_val = np.where(a_cens, pair.detection_limit_nh4, pair.value_nh4).astype(float)
    plain = ~n_cens
    sd_n = np.where(plain, _error_sd(config, "nitrate", n_val), 0.0)
    sd_a = np.where(a_cens, 0.5 * a_val, _error_sd(config, "ammonium", a_val))
    value = np.where(plain & a_cens, n_val + 0.5 * a_val, n_val + a_val)
    out = rest.copy()
    idx = pair["index"].to_numpy()
    out.loc[idx, "value"] = np.where(plain, value, np.nan)
    out.loc[idx, "detection_limit"] = np.where(plain, np.nan, value)
    out.loc[idx, "din_error_sd"] = np.where(plain, np.hypot(sd_n, sd_a), np.nan)
    return out


def _day_spans(frame: pd.DataFrame, wb: WaterBodyConfig) -> np.ndarray:
    """Each row's span [d]: the length of the local day of ``wb`` ending at a whole-day row's time, else 0."""
    whole = frame.whole_day.to_numpy(dtype=bool)
    span = np.zeros(len(frame))
    if whole.any():
        end = pd.DatetimeIndex(frame.time_utc[whole]).tz_convert(wb.timezone)
        start = (end - pd.DateOffset(days=1)).tz_convert("UTC")
        span[whole] = (end.tz_convert("UTC") - start).total_seconds().to_numpy() / 86400.0
    return span


def to_observations(frame: pd.DataFrame, config: Config, wb: WaterBodyConfig) -> Observations:
    """Stored readings of ``wb``'s basins (columns of :func:`monitor.store.readings.readings_frame`, censored
    ones with ``censored`` and ``detection_limit``) → :class:`Observations` (see the module)."""
    if frame.empty:
        return Observations.empty()
    frame = frame.reset_index(drop=True)
    if "censored" not in frame:
        frame["censored"] = False
        frame["detection_limit"] = np.nan
    if "whole_day" not in frame:
        frame["whole_day"] = False
    frame["censored"] = frame.censored.astype(bool)
    frame = frame[frame.variable.isin(OBSERVED_VARIABLES)]
    frame = _din(one_per_source(frame, config), config)
    censored = frame.censored.to_numpy(dtype=bool)
    limit = frame.detection_limit.to_numpy(dtype=float)
    frame = frame[~censored | (np.isfinite(limit) & (limit > 0))]
    if frame.empty:
        return Observations.empty()
    basin_of = {s.id: wb.basin_index(s.basin) for s in config.stations_of(wb.id) if s.basin}
    sensor_of = {sid: i for i, sid in enumerate(chlorophyll_sensors(config, wb))}
    kinds = frame.variable.to_numpy(dtype=str)
    censored = frame.censored.to_numpy(dtype=bool)
    values = np.where(censored, frame.detection_limit.to_numpy(dtype=float), frame.value.to_numpy(dtype=float))
    fraction = np.array([config.observation_errors[k].fraction for k in kinds])
    floor = np.array([config.observation_errors[k].floor for k in kinds])
    error = np.maximum(floor, fraction * np.abs(values))
    if "din_error_sd" in frame:
        din = frame.din_error_sd.to_numpy(dtype=float)
        error = np.where(np.isfinite(din), din, error)
    sensor = np.array([sensor_of.get(s, -1) if k == "chlorophyll_fluorescence" else -1
                       for s, k in zip(frame.station_id, kinds)], dtype=int)
    return Observations(time_d=np.asarray(to_epoch_days(frame.time_utc)), kind=kinds,
                        basin=frame.station_id.map(basin_of).to_numpy(dtype=int), sensor=sensor,
                        value=values, error_sd=error, span_d=_day_spans(frame, wb), censored=censored)
