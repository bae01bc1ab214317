"""The gather step for many water bodies at once: a few set-based queries, then the same assembly.

:func:`monitor.forecasting.cycle.gather` is :func:`~monitor.forecasting.cycle.fetch`
(about a dozen queries for one water body) followed by the pure
:func:`~monitor.forecasting.cycle.assemble`. For thousands of water bodies
the driver's round trips to the database dominate, so :func:`fetch` here
reads a chunk of water bodies with one query per kind of data (newest
checkpoints, readings of all their stations, censored readings, first-guess
readings, daily means for the observed history, the newest weather
forecasts, the verified record the blend is set from, candidate late
readings) and splits them per water body in memory into the same
:class:`~monitor.forecasting.cycle.FetchedInputs`; ``cycle.assemble`` makes
the inputs from either (a property test compares them), and may run on a
Dask worker beside ``compute``.

Where a cycle starts (cold-start gap, late readings) is decided for each
water body by :func:`monitor.forecasting.cycle.cycle_start`; a live
re-analysis for late readings (rare: a normal day finds no candidate) and a
replay's re-analysis for readings reported late are looked up per water
body. In a replay every set-based read of readings goes through the same
:class:`~monitor.store.availability.Availability` as ``cycle.fetch``
(:func:`monitor.forecasting.late.replay_availability`): it depends on the
station and time only, so the union's rows split per water body are those
each water body's own query keeps.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterator, Sequence

import numpy as np
import pandas as pd
from sqlalchemy import and_, func, select, tuple_
from sqlalchemy.engine import Engine

from monitor.config import Config, WaterBodyConfig
from monitor.forecasting import cycle
from monitor.forecasting.blend_setup import COMPONENTS, RECORD_DAYS
from monitor.forecasting.history import HISTORY_VARIABLES, basin_stations, history_windows
from monitor.forecasting.late import replay_availability
from monitor.forecasting.observations import OBSERVED_VARIABLES
from monitor.store import schema
from monitor.store.availability import Availability
from monitor.store.daily import daily_means
from monitor.store.late import stations_with_late_readings
from monitor.store.readings import readings_frame
from monitor.timeutil import utc_series_from_db
from monitor.verification.records import RECORD_COLUMNS

#: Water bodies per set of queries: bounds the rows held in memory at once (readings of a chunk).
CHUNK = 100

#: One water body's fetched inputs (what ``cycle.fetch`` reads for it).
RawInputs = cycle.FetchedInputs
#: The pure assembly shared with ``cycle.gather``.
assemble = cycle.assemble


def gather_many(engine: Engine, config: Config, bodies: Sequence[WaterBodyConfig], analysis: dt.datetime, *,
                season_start: dt.datetime | None = None, replay: bool = False, chunk: int = CHUNK
                ) -> Iterator[tuple[str, cycle.CycleInputs | Exception]]:
    """(water body id, CycleInputs) for each of ``bodies``, as ``cycle.gather`` would give them, chunk by chunk.

    A water body whose inputs cannot be made yields its exception instead
    (one water body's failure never stops the others); a query of a whole
    chunk that fails falls back to fetching each of its water bodies alone.
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
    """What ``cycle.fetch`` reads for each of ``bodies`` at ``analysis`` (aware UTC), in one query per kind."""
    available = replay_availability(config, analysis) if replay else None
    found = latest_checkpoints(engine, [wb.id for wb in bodies], analysis - dt.timedelta(seconds=1))
    candidates = set() if replay else _late_candidates(engine, config, bodies, found)
    starts: dict[str, tuple[dt.datetime, bytes | None, str]] = {}
    for wb in bodies:
        newest = found[wb.id][:2] if wb.id in found else None
        # without a candidate late reading, late_restart would keep the checkpoint and say nothing
        restart = None if replay or wb.id in candidates else _keep
        starts[wb.id] = cycle.cycle_start(engine, config, wb, analysis, newest, season_start=season_start,
                                          replay=replay, restart=restart)
    stations = {wb.id: cycle.cycle_stations(config, wb) for wb in bodies}
    readings = _split(engine, stations, {w: cycle.reading_window(s[0], analysis) for w, s in starts.items()},
                      max_flag=cycle.assimilated_flag(config), available=available)
    cold = [wb.id for wb in bodies if starts[wb.id][1] is None]
    guess = _split(engine, {w: stations[w] for w in cold},
                   {w: cycle.first_guess_window(starts[w][0]) for w in cold}, max_flag=cycle.assimilated_flag(config),
                   available=available)
    censored = _split(engine, {wb.id: [s.id for s in config.stations_of(wb.id) if s.basin is not None]
                               for wb in bodies},
                      {w: (s[0], analysis) for w, s in starts.items()}, open_start=True,
                      variables=OBSERVED_VARIABLES, max_flag=0, include_censored=True, available=available)
    weather = latest_weather_forecasts(engine, sorted({wb.weather_station for wb in bodies if wb.weather_station}),
                                       analysis)
    history = _history_daily(engine, config, bodies, analysis, available)
    records = _records(engine, [wb.id for wb in bodies], analysis - dt.timedelta(days=RECORD_DAYS))
    return {wb.id: RawInputs(
        water_body_id=wb.id, analysis=analysis, start=starts[wb.id][0], checkpoint=starts[wb.id][1],
        late_note=starts[wb.id][2], readings=readings[wb.id],
        censored=censored[wb.id][censored[wb.id].censored], first_guess_readings=guess.get(wb.id),
        weather=weather.get(wb.weather_station, _EMPTY_WEATHER) if wb.weather_station else pd.DataFrame(),
        history_daily=history[wb.id],
        records=records[wb.id] if wb.id in records else pd.DataFrame(columns=RECORD_COLUMNS),
        available=available) for wb in bodies}


def _keep(engine, config, wb, analysis, found):
    """The restart of a water body without late readings: its newest checkpoint, no note."""
    return found, ""


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


def _late_candidates(engine: Engine, config: Config, bodies: Sequence[WaterBodyConfig],
                     found: dict[str, tuple]) -> set[str]:
    """The water bodies that may have late readings (stamped at or before their newest checkpoint,
    received after it was stored: what :func:`monitor.forecasting.late.late_restart` looks for), from
    one query with the chunk's latest checkpoint time and earliest creation time."""
    stations = {wb.id: [s.id for s in config.stations_of(wb.id) if s.basin] for wb in bodies if wb.id in found}
    stations = {k: v for k, v in stations.items() if v}
    if not stations:
        return set()
    late = stations_with_late_readings(
        engine, stations=sorted({s for v in stations.values() for s in v}), variables=OBSERVED_VARIABLES,
        covered_until=max(found[w][0] for w in stations), received_after=min(found[w][2] for w in stations),
        max_flag=cycle.assimilated_flag(config))
    return {w for w, ids in stations.items() if late.intersection(ids)}


def _split(engine: Engine, stations: dict[str, list[str]], windows: dict[str, tuple[dt.datetime, dt.datetime]], *,
           open_start: bool = False, **query) -> dict[str, pd.DataFrame]:
    """Per water body, its stations' readings in its window [start, end] ((start, end] with
    ``open_start``), as :func:`readings_frame` with ``query`` gives them: one query over the union."""
    if not stations:
        return {}
    union = sorted({s for ids in stations.values() for s in ids})
    frame = readings_frame(engine, stations=union, start=min(windows[w][0] for w in stations),
                           end=max(windows[w][1] for w in stations), **query)
    groups = frame.groupby("station_id", sort=False).indices if len(frame) else {}
    times = frame.time_utc.dt.tz_convert(None).to_numpy()
    out = {}
    for wb_id, ids in stations.items():
        rows = np.sort(np.concatenate([groups[s] for s in ids if s in groups] or [np.array([], dtype=np.intp)]))
        start, end = (np.datetime64(pd.Timestamp(t).tz_convert("UTC").tz_localize(None)) for t in windows[wb_id])
        t = times[rows]
        keep = ((t > start) if open_start else (t >= start)) & (t <= end)
        out[wb_id] = frame.iloc[rows[keep]].reset_index(drop=True)  # rows back in the frame's order
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


def _history_daily(engine: Engine, config: Config, bodies: Sequence[WaterBodyConfig], analysis: dt.datetime,
                   available: Availability | None = None) -> dict[str, list[pd.DataFrame]]:
    """Per water body, what :func:`monitor.forecasting.history.history_daily` returns (with ``available``):
    one query per distinct window over the basin stations of every water body with that window."""
    stations = {wb.id: list(basin_stations(config, wb)) for wb in bodies}
    windows = {wb.id: history_windows(wb, analysis) if stations[wb.id] else [] for wb in bodies}
    users: dict[tuple[dt.datetime, dt.datetime], list[str]] = {}
    for wb_id, ws in windows.items():
        for w in ws:
            users.setdefault(w, []).append(wb_id)
    split: dict[tuple, dict[str, pd.DataFrame]] = {}
    for (a, b), ids in users.items():
        union = sorted({s for w in ids for s in stations[w]})
        frame = daily_means(engine, stations=union, variables=list(HISTORY_VARIABLES), anchor=analysis, start=a, end=b,
                            available=available)
        groups = frame.groupby("station_id", sort=False).indices if len(frame) else {}
        split[(a, b)] = {w: frame.iloc[np.sort(np.concatenate([groups[s] for s in stations[w] if s in groups]
                                                              or [np.array([], dtype=np.intp)]))]
                         .reset_index(drop=True) for w in ids}
    return {wb_id: [split[w][wb_id] for w in ws] for wb_id, ws in windows.items()}


def _records(engine: Engine, water_body_ids: Sequence[str], since: dt.datetime) -> dict[str, pd.DataFrame]:
    """Per water body, what :func:`monitor.verification.live.stored_records` returns (valid since ``since``,
    of the blend's ``COMPONENTS``)."""
    t = schema.forecast_scores
    q = select(t).where(t.c.water_body_id.in_(list(water_body_ids)), t.c.valid_utc >= since,
                         t.c.forecaster.in_(COMPONENTS))
    with engine.connect() as conn:
        frame = pd.DataFrame(conn.execute(q).mappings().all())
    if frame.empty:
        return {}
    frame = frame.rename(columns={"water_body_id": "water_body"})
    for col in ("origin_utc", "valid_utc"):
        frame[col] = pd.to_datetime(frame[col], utc=True)
    return {w: sub[RECORD_COLUMNS].reset_index(drop=True) for w, sub in frame.groupby("water_body", sort=False)}
