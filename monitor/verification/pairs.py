"""Forecast–observation pairs of stored runs: Bloomline and its baselines, on the same days.

Every cycle stores, with its run, the members' daily means of Bloomline's
chlorophyll forecasts and of the baselines issued beside them
(:mod:`monitor.forecasting.baselines`), each with the observed variable that
verifies it (:mod:`monitor.forecasting.history`). For every run (origin
t0), basin and quantity, and every lead day k = 1..H whose window
(t0 + k − 1 d, t0 + k d] holds QC-passed readings of that variable, one
*pair* holds the observed daily mean and each forecaster's members for that
day. Nothing is recomputed: pairs score what was issued.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from sqlalchemy import select
from sqlalchemy.engine import Engine

from monitor.config import Config, WaterBodyConfig
from monitor.forecasting.baselines import BASELINES
from monitor.store import schema
from monitor.store.availability import Availability
from monitor.store.daily import daily_means
from monitor.store.runs import load_forecast_members

FORECASTERS = ("bloomline", "process_model", "blend", "blend_raw", *BASELINES)
META_COLUMNS = ["run_id", "origin_utc", "valid_utc", "water_body", "basin_id", "quantity", "variable",
                "lead_days", "observed", "observed_n"]
#: A forecaster's outlook at an origin: the largest daily probability of reaching each level
#: over the horizon (baseline members are per-lead marginals, so this is its within-horizon estimate).
OUTLOOK_COLUMNS = ["water_body", "basin_id", "quantity", "origin_utc", "forecaster", "level", "probability"]
DAY = pd.Timedelta(days=1)


@dataclass
class Pairs:
    """Pairs of one or more water bodies: ``meta`` (one row per pair, ``META_COLUMNS``) and, per
    forecaster, a list of member arrays [µg/L] aligned with ``meta`` (None where it has no forecast).
    ``observed`` holds the daily observed series used: (water body, basin, quantity) → a frame of
    value and n by window end."""

    meta: pd.DataFrame
    members: dict[str, list[np.ndarray | None]] = field(default_factory=dict)
    outlooks: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=OUTLOOK_COLUMNS))
    observed: dict[tuple[str, str, str], pd.DataFrame] = field(default_factory=dict)

    @staticmethod
    def concat(parts: list[Pairs]) -> Pairs:
        parts = [p for p in parts if len(p.meta) or len(p.outlooks)]
        if not parts:
            return Pairs(pd.DataFrame(columns=META_COLUMNS), {f: [] for f in FORECASTERS})
        return Pairs(pd.concat([p.meta for p in parts], ignore_index=True),
                     {f: [m for p in parts for m in p.members[f]] for f in FORECASTERS},
                     pd.concat([p.outlooks for p in parts], ignore_index=True),
                     {k: v for p in parts for k, v in p.observed.items()})


def stored_runs(engine: Engine, water_body_id: str, first=None, last=None) -> pd.DataFrame:
    """Runs of a water body with a forecast: id, analysis_utc (oldest first), optionally in [first, last]."""
    runs = schema.forecast_runs
    q = (select(runs.c.id, runs.c.analysis_utc)
         .where((runs.c.water_body_id == water_body_id) & (runs.c.status != "failed")))
    if first is not None:
        q = q.where(runs.c.analysis_utc >= first)
    if last is not None:
        q = q.where(runs.c.analysis_utc <= last)
    with engine.connect() as conn:
        return pd.DataFrame(conn.execute(q.order_by(runs.c.analysis_utc)).all(), columns=["id", "analysis_utc"])


def observed_daily(engine: Engine, config: Config, wb: WaterBodyConfig, anchor, start, end,
                   available: Availability | None = None) -> pd.DataFrame:
    """QC-passed daily means per basin and variable on windows anchored at ``anchor`` (stations of a
    basin averaged; in a replay, ``available``: of the readings available by then): columns basin_id,
    variable, day_end_utc, value, n."""
    basin_of = {s.id: s.basin for s in config.stations_of(wb.id) if s.basin}
    variables = sorted({v for s in config.stations_of(wb.id) for v in s.variables})
    frame = daily_means(engine, stations=list(basin_of), variables=variables, anchor=anchor, start=start, end=end,
                        available=available)
    if frame.empty:
        return pd.DataFrame(columns=["basin_id", "variable", "day_end_utc", "value", "n"])
    frame = frame.assign(basin_id=frame.station_id.map(basin_of))
    return (frame.groupby(["basin_id", "variable", "day_end_utc"])
            .agg(value=("value", "mean"), n=("n", "sum")).reset_index())


def water_body_pairs(runs_engine: Engine, live: Engine, config: Config, wb: WaterBodyConfig, *,
                     first=None, last=None, until=None, progress: Callable[[], None] | None = None,
                     available: Availability | None = None) -> Pairs:
    """Pairs of ``wb``'s runs stored in ``runs_engine`` (analysis in [first, last]) against the readings of
    ``live`` (in day windows ending at or before ``until``, when given; of the readings ``available``
    then, in a replay)."""
    runs = stored_runs(runs_engine, wb.id, first, last)
    thresholds = tuple(lv.chlorophyll_ugL for lv in wb.alerts.levels)
    members = load_forecast_members(runs_engine, runs.id.tolist())
    rows, outlooks = [], []
    out: dict[str, list] = {f: [] for f in FORECASTERS}
    observed: dict[tuple[str, str, str], pd.DataFrame] = {}
    by_run: dict[int, list] = {}
    for (run_id, basin, quantity, forecaster), (variable, arr) in members.items():
        by_run.setdefault(run_id, []).append((basin, quantity, forecaster, variable, arr))
    cache: dict[int, pd.DataFrame] = {}   # observed daily means per time of day of the origins
    for run_id, origin in zip(runs.id, runs.analysis_utc):
        origin = pd.Timestamp(origin)
        tod = int((origin - origin.normalize()).total_seconds())
        if tod not in cache:
            end = pd.Timestamp(runs.analysis_utc.iloc[-1]) + (wb.alerts.horizon_days + 1) * DAY
            cache[tod] = observed_daily(live, config, wb, origin.to_pydatetime(),
                                        pd.Timestamp(runs.analysis_utc.iloc[0]) - DAY,
                                        end if until is None else min(end, pd.Timestamp(until)), available)
        daily = cache[tod]
        if not isinstance(daily, dict):
            daily = cache[tod] = {key: g.set_index("day_end_utc") for key, g in daily.groupby(["basin_id", "variable"])}
        issued = {(b, q, f): (v, a) for b, q, f, v, a in by_run.get(run_id, [])}
        for (basin, quantity, forecaster), (variable, arr) in issued.items():
            for lv, thr in enumerate(thresholds, start=1):
                p = (arr[1:] >= thr).mean(axis=1)
                p = p[np.all(np.isfinite(arr[1:]), axis=1)]
                if p.size:
                    outlooks.append((wb.id, basin, quantity, origin, forecaster, lv, float(p.max())))
            if forecaster != "bloomline":
                continue
            series = daily.get((basin, variable))
            if series is None:
                continue
            observed.setdefault((wb.id, basin, quantity), series)
            for lead in range(1, arr.shape[0]):
                valid = origin + lead * DAY
                if valid not in series.index:
                    continue
                rows.append(dict(run_id=run_id, origin_utc=origin, valid_utc=valid, water_body=wb.id,
                                 basin_id=basin, quantity=quantity, variable=variable, lead_days=lead,
                                 observed=float(series.value[valid]), observed_n=int(series.n[valid])))
                for name in FORECASTERS:
                    got = issued.get((basin, quantity, name))
                    m = None if got is None or got[0] != variable else got[1][lead]
                    out[name].append(m if m is not None and np.all(np.isfinite(m)) else None)
        if progress is not None:
            progress()
    return Pairs(pd.DataFrame(rows, columns=META_COLUMNS), out, pd.DataFrame(outlooks, columns=OUTLOOK_COLUMNS),
                 observed)
