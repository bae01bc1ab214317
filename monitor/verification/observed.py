"""Daily observed series of the verified quantities, on the forecast's day windows.

A forecast issued at ``t0`` covers day k as the window (t0 + k − 1 d, t0 + k d]
(:func:`assimilation.forecast.daily_statistics`). The observed value of that
day is the mean of the QC-passed readings (flag 1) inside the same window,
with the number of readings that made it. Windows are anchored at the
analysis time of day, so every daily origin shares them.

Which readings stand for which forecast quantity:

* ``total_chlorophyll`` — per basin, the one chlorophyll variable with the
  most observed days: extracted ``chlorophyll_a`` where a basin is sampled
  daily, otherwise the in-situ ``chlorophyll_fluorescence``. One variable per
  basin keeps the series homogeneous, so the model and the baselines are
  scored against the same thing. Fluorescence is scored as reported (no gain
  correction), as a user would see it.
* ``cyanobacteria_chlorophyll`` — ``phycocyanin`` (cyanobacteria
  chlorophyll-a equivalent), where a basin has it.
* ``water_temperature`` — the statistical baseline's regressor, not scored.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
from sqlalchemy.engine import Engine

from monitor.config import Config, WaterBodyConfig
from monitor.store.readings import readings_frame

#: Forecast quantity → the variables that observe it, in order of preference.
OBSERVED_BY = {
    "total_chlorophyll": ("chlorophyll_a", "chlorophyll_fluorescence"),
    "cyanobacteria_chlorophyll": ("phycocyanin",),
}
REGRESSORS = {"water_temperature": ("water_temperature",)}
COLUMNS = ["basin_id", "quantity", "variable", "day_end_utc", "value", "n"]
NS_PER_DAY = 86_400 * 1_000_000_000


def day_windows(times: pd.Series, anchor: dt.datetime) -> pd.Series:
    """The end of the day window (anchor + n days) that holds each time: (end − 1 d, end]."""
    ns = times.astype("int64").to_numpy() - pd.Timestamp(anchor).value
    index = -((-ns) // NS_PER_DAY)  # ceiling division: a time exactly at a window's end belongs to it
    return pd.to_datetime(pd.Timestamp(anchor).value + index * NS_PER_DAY, utc=True)


def daily_observed(engine: Engine, config: Config, wb: WaterBodyConfig, anchor: dt.datetime,
                   start: dt.datetime, end: dt.datetime) -> pd.DataFrame:
    """Daily observed series of ``wb``'s basins in [start, end] (columns ``COLUMNS``)."""
    stations = {s.id: s.basin for s in config.stations if s.water_body == wb.id and s.basin}
    wanted = {v for vs in (*OBSERVED_BY.values(), *REGRESSORS.values()) for v in vs}
    frame = readings_frame(engine, stations=list(stations), variables=sorted(wanted), start=start, end=end,
                           max_flag=1)
    frame = frame[np.isfinite(frame.value)]
    if frame.empty:
        return pd.DataFrame({c: pd.Series([], dtype=object) for c in COLUMNS})
    frame = frame.assign(basin_id=frame.station_id.map(stations), day_end_utc=day_windows(frame.time_utc, anchor))
    daily = (frame.groupby(["basin_id", "variable", "day_end_utc"]).value.agg(["mean", "size"])
             .rename(columns={"mean": "value", "size": "n"}).reset_index())
    parts = []
    for quantity, variables in {**OBSERVED_BY, **REGRESSORS}.items():
        for basin, sub in daily[daily.variable.isin(variables)].groupby("basin_id"):
            days = sub.groupby("variable").size()
            best = max(days.index, key=lambda v: (days[v], -variables.index(v)))
            parts.append(sub[sub.variable == best].assign(quantity=quantity))
    if not parts:
        return pd.DataFrame({c: pd.Series([], dtype=object) for c in COLUMNS})
    return pd.concat(parts, ignore_index=True)[COLUMNS].sort_values(["basin_id", "quantity", "day_end_utc"],
                                                                     ignore_index=True)
