"""The gather step for many water bodies at once: a few set-based queries, then pure assembly.

:func:`monitor.forecasting.cycle.gather` reads one water body with about a
dozen queries; for thousands of water bodies the driver's round trips to
the database dominate. :func:`fetch` reads a chunk of water bodies with one
query per kind of data (newest checkpoints, readings of all their stations,
daily means for the observed history, the newest weather forecasts, the
verified record the blend is set from, candidate late readings), split per
water body in memory into picklable :class:`RawInputs`; :func:`assemble`
turns one of them into exactly the :class:`~monitor.forecasting.cycle.CycleInputs`
that ``cycle.gather`` returns (a property test compares them). ``assemble``
does no I/O, so it may run on a Dask worker beside ``compute``.

The rare case of late readings (stamped before the newest checkpoint,
received after it) is resolved per water body with
:func:`monitor.forecasting.late.late_restart`; a normal day finds none.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from sqlalchemy import and_, func, select, tuple_
from sqlalchemy.engine import Engine

from assimilation.observe import OBSERVABLE_KINDS
from monitor.config import Config, WaterBodyConfig
from monitor.config.model_setup import chlorophyll_sensors, filter_config, model_spec
from monitor.forecasting import cycle
from monitor.forecasting.blend_setup import RECORD_DAYS, blend_settings
from monitor.forecasting.drivers import StationSeries, driver_stations, observed_drivers
from monitor.forecasting.history import (
    CLIMATOLOGY_MARGIN_DAYS,
    CLIMATOLOGY_YEARS,
    OBSERVED_BY,
    RECENT_DAYS,
    REGRESSOR,
    ObservedHistory,
    series_by_basin,
)
from monitor.forecasting.late import late_restart
from monitor.store import schema
from monitor.store.daily import daily_means
from monitor.store.readings import readings_frame
from monitor.timeutil import to_epoch_days, utc_series_from_db
from monitor.verification.records import RECORD_COLUMNS

DAY = dt.timedelta(days=1)
#: Water bodies per set of queries: bounds the rows held in memory at once (readings of a chunk).
CHUNK = 100
HISTORY_VARIABLES = sorted({v for vs in OBSERVED_BY.values() for v in vs} | {REGRESSOR})


@dataclass
class RawInputs:
    """What the store holds for one water body's cycle, read in bulk; :func:`assemble` makes the inputs."""

    water_body_id: str
    analysis: dt.datetime
    start: dt.datetime
    checkpoint: bytes | None
    late_note: str
    readings: pd.DataFrame                  # station_readings over the cycle's window
    first_guess_readings: pd.DataFrame | None  # cold start: readings around the start
    weather: pd.DataFrame                   # newest weather forecast (or empty)
    history_daily: list[pd.DataFrame] = field(default_factory=list)  # daily means per history window
    records: pd.DataFrame | None = None     # verified record since the blend's window


def gather_many(engine: Engine, config: Config, bodies: Sequence[WaterBodyConfig], analysis: dt.datetime, *,
                season_start: dt.datetime | None = None, replay: bool = False, chunk: int = CHUNK
                ) -> Iterator[tuple[str, cycle.CycleInputs | Exception]]:
    """(water body id, CycleInputs) for each of ``bodies``, as ``cycle.gather`` would give them, chunk by chunk.

    A water body whose inputs cannot be made yields its exception instead
    (one water body's failure never stops the others); a query of a whole
    chunk that fails falls back to ``cycle.gather`` for each of its water bodies.
    """
    for raw_id, raw in fetch_many(engine, config, bodies, analysis, season_start=season_start, replay=replay,
                                  chunk=chunk):
        if isinstance(raw, Exception):
            yield raw_id, raw
            continue
        try:
            yield raw_id, assemble(config, config.water_body(raw_id), raw)
        except Exception as exc:  # noqa: BLE001 - reported as that water body's failure
            yield raw_id, exc


def fetch_many(engine: Engine, config: Config, bodies: Sequence[WaterBodyConfig], analysis: dt.datetime, *,
               season_start: dt.datetime | None = None, replay: bool = False, chunk: int = CHUNK
               ) -> Iterator[tuple[str, RawInputs | Exception]]:
    """:func:`fetch` over ``bodies`` in chunks of ``chunk``; a chunk whose queries fail is fetched body by
    body, so the failure is one water body's."""
    for i in range(0, len(bodies), chunk):
        part = list(bodies[i:i + chunk])
        try:
            raws = fetch(engine, config, part, analysis, season_start=season_start, replay=replay)
        except Exception:  # noqa: BLE001 - find which water body is at fault
            for wb in part:
                try:
                    yield wb.id, fetch(engine, config, [wb], analysis, season_start=season_start, replay=replay)[wb.id]
                except Exception as exc:  # noqa: BLE001
                    yield wb.id, exc
            continue
        yield from ((wb.id, raws[wb.id]) for wb in part)


def fetch(engine: Engine, config: Config, bodies: Sequence[WaterBodyConfig], analysis: dt.datetime, *,
          season_start: dt.datetime | None = None, replay: bool = False) -> dict[str, RawInputs]:
    """Everything the cycles of ``bodies`` at ``analysis`` (aware UTC) need, in one query per kind."""
    found = latest_checkpoints(engine, [wb.id for wb in bodies], analysis - dt.timedelta(seconds=1))
    late_notes = dict.fromkeys((wb.id for wb in bodies), "")
    if not replay:
        for wb_id in _with_late_candidates(engine, config, bodies, found):
            wb = config.water_body(wb_id)
            ckpt, late_notes[wb_id] = late_restart(engine, config, wb, analysis, found[wb_id][:2])
            found[wb_id] = (*ckpt, None)
    starts = {wb.id: found[wb.id][0] if wb.id in found else (season_start or (analysis - DAY)) for wb in bodies}
    windows = {wb.id: (min(starts[wb.id] - dt.timedelta(days=3), analysis - dt.timedelta(days=14)), analysis)
               for wb in bodies}
    stations = {wb.id: _stations(config, wb) for wb in bodies}
    readings = _split_readings(engine, config, stations, windows)
    cold = [wb for wb in bodies if wb.id not in found]
    guess_readings = _split_readings(engine, config, {wb.id: stations[wb.id] for wb in cold},
                                     {wb.id: (starts[wb.id] - dt.timedelta(days=14), starts[wb.id] + dt.timedelta(days=2))
                                      for wb in cold})
    weather = latest_weather_forecasts(engine, sorted({wb.weather_station for wb in bodies if wb.weather_station}),
                                       analysis)
    history = _history_daily(engine, config, bodies, analysis)
    records = _records(engine, [wb.id for wb in bodies], analysis - dt.timedelta(days=RECORD_DAYS))
    empty_weather = pd.DataFrame()
    return {wb.id: RawInputs(
        water_body_id=wb.id, analysis=analysis, start=starts[wb.id],
        checkpoint=found[wb.id][1] if wb.id in found else None, late_note=late_notes[wb.id],
        readings=readings[wb.id], first_guess_readings=guess_readings.get(wb.id),
        weather=weather.get(wb.weather_station, _EMPTY_WEATHER) if wb.weather_station else empty_weather,
        history_daily=history[wb.id], records=records.get(wb.id)) for wb in bodies}


def assemble(config: Config, wb: WaterBodyConfig, raw: RawInputs) -> cycle.CycleInputs:
    """The cycle's inputs from what :func:`fetch` read: exactly what ``cycle.gather`` returns. Pure."""
    spec = model_spec(wb)
    cfg = filter_config(config, wb)
    analysis, start = raw.analysis, raw.start
    guess = None
    if raw.checkpoint is None:
        guess = cycle.first_guess(None, config, wb, spec, start, frame=raw.first_guess_readings)
    series = StationSeries(raw.readings)
    notes: list[str] = []
    drivers = observed_drivers(series, config, wb, start, analysis, notes)
    horizon = wb.alerts.horizon_days
    history = _history(config, wb, raw.history_daily)
    scenarios = cycle.outlook_drivers(None, config, wb, series, analysis, horizon, history=history, notes=notes,
                                      weather=raw.weather)
    records = raw.records if raw.records is not None else pd.DataFrame(columns=RECORD_COLUMNS)
    return cycle.CycleInputs(
        water_body_id=wb.id, analysis_d=float(to_epoch_days(analysis)), spec=spec, filter=cfg,
        checkpoint=raw.checkpoint, start_d=float(to_epoch_days(start)), initial_state=guess,
        seed=config.filter.seed + sum(map(ord, wb.id)),
        observations=cycle.to_observations(cycle.observations_frame(raw.readings, config, wb, start), config, wb),
        drivers=drivers, forecast_drivers=scenarios,
        horizon_days=horizon, thresholds_ugL=tuple(lv.chlorophyll_ugL for lv in wb.alerts.levels),
        window_days=config.filter.window_days, basin_ids=tuple(b.id for b in wb.basins),
        history=history, substitutions=tuple(notes), late_note=raw.late_note,
        publish_blend=config.filter.published == "blend",
        blend=blend_settings(records, analysis, horizon),
        sensor_basins=tuple(config.station(s).basin for s in chlorophyll_sensors(config, wb)))


# --------------------------------------------------------------------------
# the set-based queries


def latest_checkpoints(engine: Engine, water_body_ids: Sequence[str], at_or_before: dt.datetime
                       ) -> dict[str, tuple[dt.datetime, bytes, dt.datetime]]:
    """The newest checkpoint at or before a time of each water body: id → (time, bytes, created_at)."""
    t = schema.checkpoints
    newest = (select(t.c.water_body_id, func.max(t.c.time_utc).label("time_utc"))
              .where(t.c.water_body_id.in_(list(water_body_ids)), t.c.time_utc <= at_or_before)
              .group_by(t.c.water_body_id).subquery())
    q = (select(t.c.water_body_id, t.c.time_utc, t.c.data, t.c.created_at)
         .join_from(t, newest, and_(t.c.water_body_id == newest.c.water_body_id, t.c.time_utc == newest.c.time_utc)))
    with engine.connect() as conn:
        return {r.water_body_id: (r.time_utc, bytes(r.data), r.created_at) for r in conn.execute(q)}


def _with_late_candidates(engine: Engine, config: Config, bodies: Sequence[WaterBodyConfig],
                          found: dict[str, tuple]) -> list[str]:
    """The water bodies with readings stamped at or before their newest checkpoint but received after it
    was stored (what :func:`monitor.forecasting.late.late_restart` looks for), in one query."""
    basin_stations = {wb.id: [s.id for s in config.stations_of(wb.id) if s.basin] for wb in bodies if wb.id in found}
    basin_stations = {k: v for k, v in basin_stations.items() if v}
    if not basin_stations:
        return []
    covered = max(found[w][0] for w in basin_stations)
    created = min(found[w][2] for w in basin_stations)
    r, b = schema.readings.c, schema.ingest_batches.c
    max_flag = 3 if config.filter.assimilate_suspect else 1
    q = (select(r.station_id, func.max(r.time_utc), func.min(r.time_utc), func.max(b.received_at))
         .select_from(schema.readings.join(schema.ingest_batches, r.batch_id == b.id))
         .where(r.station_id.in_(sorted({s for v in basin_stations.values() for s in v})),
                r.variable.in_(list(OBSERVABLE_KINDS)), r.qc_flag <= max_flag, r.value.is_not(None),
                r.time_utc <= covered, b.received_at > created)
         .group_by(r.station_id))
    with engine.connect() as conn:
        stations_with = {row[0] for row in conn.execute(q)}
    # any candidate station: late_restart decides exactly (it queries with the body's own times)
    return [w for w, ids in basin_stations.items() if stations_with.intersection(ids)]


def _stations(config: Config, wb: WaterBodyConfig) -> list[str]:
    """The stations ``cycle.station_readings`` reads for ``wb``."""
    return sorted({s.id for s in config.stations_of(wb.id)} | set(driver_stations(config, wb)))


def _split_readings(engine: Engine, config: Config, stations: dict[str, list[str]],
                    windows: dict[str, tuple[dt.datetime, dt.datetime]]) -> dict[str, pd.DataFrame]:
    """Per water body, its stations' readings in its window [start, end]: one query over the union."""
    if not stations:
        return {}
    max_flag = 3 if config.filter.assimilate_suspect else 1
    union = sorted({s for ids in stations.values() for s in ids})
    frame = readings_frame(engine, stations=union, start=min(w[0] for w in windows.values()),
                           end=max(w[1] for w in windows.values()), max_flag=max_flag)
    groups = {k: v for k, v in frame.groupby("station_id", sort=False).indices.items()} if len(frame) else {}
    times = frame.time_utc
    out = {}
    for wb_id, ids in stations.items():
        rows = np.concatenate([groups[s] for s in ids if s in groups]) if any(s in groups for s in ids) \
            else np.array([], dtype=int)
        rows.sort()  # back to the frame's order: time, station, variable, source
        sub = frame.iloc[rows]
        start, end = windows[wb_id]
        sub = sub[(times.iloc[rows] >= pd.Timestamp(start)).to_numpy() & (times.iloc[rows] <= pd.Timestamp(end)).to_numpy()]
        out[wb_id] = sub.reset_index(drop=True)
    return out


_EMPTY_WEATHER = pd.DataFrame({"variable": pd.Series([], dtype=object),
                               "valid_utc": pd.Series([], dtype="datetime64[ns, UTC]"),
                               "value": pd.Series([], dtype=float),
                               "issued_utc": pd.Series([], dtype="datetime64[ns, UTC]")})


def latest_weather_forecasts(engine: Engine, station_ids: Sequence[str], issued_at_or_before: dt.datetime
                             ) -> dict[str, pd.DataFrame]:
    """Per weather station, what :func:`monitor.store.readings.latest_driver_forecast` returns, in one query."""
    if not station_ids:
        return {}
    f = schema.driver_forecasts
    newest = (select(f.c.station_id, func.max(f.c.issued_utc).label("issued_utc"))
              .where(f.c.station_id.in_(list(station_ids)), f.c.issued_utc <= issued_at_or_before)
              .group_by(f.c.station_id).subquery())
    q = (select(f.c.station_id, f.c.variable, f.c.valid_utc, f.c.value, f.c.issued_utc)
         .where(tuple_(f.c.station_id, f.c.issued_utc).in_(select(newest.c.station_id, newest.c.issued_utc)))
         .order_by(f.c.station_id, f.c.variable, f.c.valid_utc, f.c.source))
    with engine.connect() as conn:
        rows = conn.execute(q).fetchall()
    if not rows:
        return {}
    st, var, valid, value, issued = zip(*rows)
    frame = pd.DataFrame({"station_id": list(st), "variable": list(var), "valid_utc": utc_series_from_db(valid),
                          "value": np.asarray(value, dtype=float), "issued_utc": utc_series_from_db(issued)})
    return {s: sub.drop(columns="station_id").drop_duplicates(["variable", "valid_utc"], keep="first")
            .reset_index(drop=True) for s, sub in frame.groupby("station_id", sort=False)}


def _history_windows(wb: WaterBodyConfig, analysis: dt.datetime) -> list[tuple[dt.datetime, dt.datetime]]:
    """The windows of :func:`monitor.forecasting.history.observed_history`."""
    windows = [(analysis - RECENT_DAYS * DAY, analysis)]
    for years in range(1, CLIMATOLOGY_YEARS + 1):
        centre = analysis - dt.timedelta(days=round(365.25 * years))
        windows.append((centre - CLIMATOLOGY_MARGIN_DAYS * DAY,
                        min(centre + (wb.alerts.horizon_days + CLIMATOLOGY_MARGIN_DAYS) * DAY, windows[0][0])))
    return windows


def _history_daily(engine: Engine, config: Config, bodies: Sequence[WaterBodyConfig], analysis: dt.datetime
                   ) -> dict[str, list[pd.DataFrame]]:
    """Per water body, the daily means of its basin stations in each history window (one query per window)."""
    basin_stations = {wb.id: [s.id for s in config.stations_of(wb.id) if s.basin] for wb in bodies}
    out: dict[str, list[pd.DataFrame]] = {wb.id: [] for wb in bodies}
    by_window: dict[tuple, list[str]] = {}
    for wb in bodies:
        if basin_stations[wb.id]:
            for k, w in enumerate(_history_windows(wb, analysis)):
                by_window.setdefault((k, *w), []).append(wb.id)
    for (_k, a, b), ids in sorted(by_window.items()):
        if not b > a:
            continue
        union = sorted({s for w in ids for s in basin_stations[w]})
        frame = daily_means(engine, stations=union, variables=HISTORY_VARIABLES, anchor=analysis, start=a, end=b)
        groups = frame.groupby("station_id", sort=False).indices if len(frame) else {}
        for w in ids:
            rows = np.sort(np.concatenate([groups[s] for s in basin_stations[w] if s in groups] or [np.array([], int)]))
            out[w].append(frame.iloc[rows].reset_index(drop=True))
    return out


def _history(config: Config, wb: WaterBodyConfig, frames: list[pd.DataFrame]) -> ObservedHistory:
    """:func:`monitor.forecasting.history.observed_history` from its windows' daily means."""
    basin_of = {s.id: s.basin for s in config.stations_of(wb.id) if s.basin}
    if not basin_of or not frames:
        return ObservedHistory()
    frame = pd.concat([f for f in frames if len(f)], ignore_index=True) if any(len(f) for f in frames) \
        else frames[0]
    return series_by_basin(frame.drop_duplicates(["station_id", "variable", "day_end_utc"]), basin_of)


def _records(engine: Engine, water_body_ids: Sequence[str], since: dt.datetime) -> dict[str, pd.DataFrame]:
    """Per water body, what :func:`monitor.verification.live.stored_records` returns (valid since ``since``)."""
    t = schema.forecast_scores
    q = select(t).where(t.c.water_body_id.in_(list(water_body_ids)), t.c.valid_utc >= since)
    with engine.connect() as conn:
        frame = pd.DataFrame(conn.execute(q).mappings().all())
    if frame.empty:
        return {}
    frame = frame.rename(columns={"water_body_id": "water_body"})
    for col in ("origin_utc", "valid_utc"):
        frame[col] = pd.to_datetime(frame[col], utc=True)
    return {w: sub[RECORD_COLUMNS].reset_index(drop=True) for w, sub in frame.groupby("water_body", sort=False)}
