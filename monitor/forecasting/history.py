"""The observed daily history a cycle's statistical baselines start from.

Per basin, daily means (QC-passed, flag 1) on the windows of the forecast
days — (end − 1 d, end] with ends at the analysis time of day
(:mod:`monitor.store.daily`) — over the recent ``RECENT_DAYS`` and the same
season of the ``CLIMATOLOGY_YEARS`` previous years. Which readings stand for
which forecast quantity (one source of truth, used by verification too):

* ``total_chlorophyll`` — the basin's one chlorophyll variable with the most
  observed days: extracted ``chlorophyll_a`` where a basin is sampled daily,
  otherwise in-situ ``chlorophyll_fluorescence`` (as reported, no gain
  correction). One variable per basin keeps a series homogeneous.
* ``cyanobacteria_chlorophyll`` — ``phycocyanin``, where a basin has it.
* ``water_temperature`` — the regressor of the autoregressive baseline.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from sqlalchemy.engine import Engine

from monitor.config import Config, WaterBodyConfig
from monitor.store.availability import Availability
from monitor.store.daily import daily_means
from monitor.timeutil import to_epoch_days

#: Forecast quantity → the variables that observe it, in order of preference.
OBSERVED_BY = {
    "total_chlorophyll": ("chlorophyll_a", "chlorophyll_fluorescence"),
    "cyanobacteria_chlorophyll": ("phycocyanin",),
}
REGRESSOR = "water_temperature"
RECENT_DAYS = 120
CLIMATOLOGY_YEARS = 2
#: Days either side of the forecast window kept from previous years (the climatology uses ±15).
CLIMATOLOGY_MARGIN_DAYS = 16


@dataclass(frozen=True)
class Series:
    """One daily series: ``days_d`` (T,) window ends [epoch days], ascending; ``values`` (T,)."""

    variable: str
    days_d: np.ndarray
    values: np.ndarray


@dataclass(frozen=True)
class ObservedHistory:
    """Daily series per (basin id, quantity or ``water_temperature``)."""

    series: dict[tuple[str, str], Series] = field(default_factory=dict)

    def get(self, basin: str, quantity: str) -> Series | None:
        return self.series.get((basin, quantity))


def choose_variable(days_by_variable: dict[str, int], preference: tuple[str, ...]) -> str | None:
    """The variable with the most observed days; ties go to the earlier in ``preference``."""
    present = [v for v in preference if days_by_variable.get(v, 0) > 0]
    return max(present, key=lambda v: (days_by_variable[v], -preference.index(v))) if present else None


def series_by_basin(frame: pd.DataFrame, basin_of: dict[str, str]) -> ObservedHistory:
    """Daily means (``monitor.store.daily.COLUMNS``) → one series per basin and quantity.

    Several stations of one basin observing the same variable are averaged per day.
    """
    if frame.empty:
        return ObservedHistory()
    frame = frame.assign(basin_id=frame.station_id.map(basin_of))
    daily = frame.groupby(["basin_id", "variable", "day_end_utc"]).value.mean().reset_index()
    out: dict[tuple[str, str], Series] = {}
    wanted = {**OBSERVED_BY, REGRESSOR: (REGRESSOR,)}
    for basin, sub in daily.groupby("basin_id"):
        counts = sub.groupby("variable").size().to_dict()
        for quantity, preference in wanted.items():
            variable = choose_variable(counts, preference)
            if variable is None:
                continue
            s = sub[sub.variable == variable]
            out[(basin, quantity)] = Series(variable, np.asarray(to_epoch_days(s.day_end_utc), dtype=float),
                                            s.value.to_numpy(dtype=float))
    return ObservedHistory(out)


#: The stored variables the history is made of.
HISTORY_VARIABLES = tuple(sorted({v for vs in OBSERVED_BY.values() for v in vs} | {REGRESSOR}))


def history_windows(wb: WaterBodyConfig, analysis: dt.datetime) -> list[tuple[dt.datetime, dt.datetime]]:
    """The windows [start, end] whose daily means make the history of ``wb`` at ``analysis``: the recent
    ``RECENT_DAYS`` and, per earlier year, the forecast window with ``CLIMATOLOGY_MARGIN_DAYS`` either
    side (cut at the recent window); empty windows left out."""
    day = dt.timedelta(days=1)
    windows = [(analysis - RECENT_DAYS * day, analysis)]
    for years in range(1, CLIMATOLOGY_YEARS + 1):
        centre = analysis - dt.timedelta(days=round(365.25 * years))
        windows.append((centre - CLIMATOLOGY_MARGIN_DAYS * day,
                        min(centre + (wb.alerts.horizon_days + CLIMATOLOGY_MARGIN_DAYS) * day, windows[0][0])))
    return [(a, b) for a, b in windows if b > a]


def basin_stations(config: Config, wb: WaterBodyConfig) -> dict[str, str]:
    """Station id → basin id of ``wb``'s basin stations (those the history is read from)."""
    return {s.id: s.basin for s in config.stations_of(wb.id) if s.basin}


def history_daily(engine: Engine, config: Config, wb: WaterBodyConfig, analysis: dt.datetime,
                  *, available: Availability | None = None) -> list[pd.DataFrame]:
    """The daily means of ``wb``'s basin stations in each of :func:`history_windows` (none without basin
    stations); in a replay, ``available``: of the readings available by then."""
    stations = list(basin_stations(config, wb))
    if not stations:
        return []
    return [daily_means(engine, stations=stations, variables=list(HISTORY_VARIABLES), anchor=analysis, start=a, end=b,
                        available=available)
            for a, b in history_windows(wb, analysis)]


def history_from_daily(config: Config, wb: WaterBodyConfig, frames: list[pd.DataFrame]) -> ObservedHistory:
    """The history of ``wb`` from its windows' daily means (:func:`history_daily`); no I/O."""
    basin_of = basin_stations(config, wb)
    if not basin_of or not frames:
        return ObservedHistory()
    frame = pd.concat([f for f in frames if len(f)], ignore_index=True) if any(len(f) for f in frames) \
        else frames[0]
    return series_by_basin(frame.drop_duplicates(["station_id", "variable", "day_end_utc"]), basin_of)


def observed_history(engine: Engine, config: Config, wb: WaterBodyConfig, analysis: dt.datetime,
                     *, available: Availability | None = None) -> ObservedHistory:
    """The recent and same-season-earlier daily history of ``wb``'s basins up to ``analysis`` (in a
    replay, ``available``: of the readings available by then)."""
    return history_from_daily(config, wb, history_daily(engine, config, wb, analysis, available=available))


def seasonal_mean(history: ObservedHistory, basin: str, quantity: str, centre_d: float,
                  half_window_d: float = 15.0, min_age_d: float = 300.0) -> float | None:
    """Mean of a basin's daily series within ±``half_window_d`` days of ``centre_d``'s day of year in
    earlier years (values at least ``min_age_d`` days before it), or None without an earlier year."""
    s = history.get(basin, quantity)
    if s is None or s.days_d.size == 0:
        return None
    offset = (centre_d - s.days_d) % 365.25
    distance = np.minimum(offset, 365.25 - offset)
    keep = (distance <= half_window_d) & (s.days_d <= centre_d - min_age_d) & np.isfinite(s.values)
    return float(s.values[keep].mean()) if keep.sum() >= 5 else None
