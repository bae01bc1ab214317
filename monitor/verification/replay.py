"""Replay a stored history day by day, as if live, in a scratch store.

The live store is never modified: the readings, their ingest batches and the
weather forecasts of the replayed water bodies are copied into a fresh
SQLite store, and the service's own daily cycle (:meth:`Service.run_cycles`,
the code path of the scheduled job) runs there one analysis time after
another. Each cycle's gather reads only readings stamped at or before its
analysis time and weather forecasts issued by then, so no forecast sees a
reading from its future.
"""

from __future__ import annotations

import datetime as dt
import tempfile
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from pathlib import Path

import pandas as pd
from sqlalchemy import insert, select
from sqlalchemy.engine import Engine

from monitor.app.service import Service
from monitor.config import Config, WaterBodyConfig
from monitor.forecasting.drivers import driver_stations
from monitor.store import schema
from monitor.store.db import open_store

#: Rows copied per insert when filling the scratch store.
COPY_CHUNK = 20_000


class DiscardTransport:
    """A mail transport that delivers nothing: a replay never sends email."""

    sender = "hindcast@localhost"

    def send(self, message) -> None:  # noqa: D401 - protocol method
        return None


@dataclass
class ReplayDay:
    """What one replayed cycle issued: the summaries and each basin's alert level after it."""

    analysis: dt.datetime
    summaries: list[dict]
    levels: dict[tuple[str, str], int]


def replay_stations(config: Config, bodies: Iterable[WaterBodyConfig]) -> list[str]:
    """Every station whose readings the cycles of ``bodies`` read (basins, gauges, weather)."""
    ids: set[str] = set()
    for wb in bodies:
        ids |= {s.id for s in config.stations if s.water_body == wb.id}
        ids |= set(driver_stations(config, wb))
    return sorted(ids)


def _copy(source: Engine, target: Engine, table, where=None) -> int:
    """Copy the rows of ``table`` (optionally filtered) from ``source`` to ``target`` in chunks."""
    q = select(table) if where is None else select(table).where(where)
    n = 0
    with source.connect() as src, target.begin() as dst:
        result = src.execution_options(stream_results=True).execute(q)
        while True:
            rows = result.fetchmany(COPY_CHUNK)
            if not rows:
                break
            dst.execute(insert(table), [dict(r._mapping) for r in rows])
            n += len(rows)
    return n


def _attach_copy(live: Engine, scratch: Engine, stations: list[str]) -> None:
    """SQLite to SQLite: copy inside the scratch database with the live one attached (no row
    goes through Python)."""
    marks = ", ".join("?" * len(stations))
    with scratch.connect() as conn:
        raw = conn.connection.dbapi_connection
        raw.execute("ATTACH DATABASE ? AS live", (live.url.database,))
        try:
            with raw:
                raw.execute("INSERT INTO ingest_batches SELECT * FROM live.ingest_batches")
                for table in ("readings", "driver_forecasts"):
                    cols = ", ".join(c.name for c in schema.metadata.tables[table].columns)
                    raw.execute(f"INSERT INTO {table} ({cols}) SELECT {cols} FROM live.{table} "
                                f"WHERE station_id IN ({marks})", stations)
        finally:
            raw.execute("DETACH DATABASE live")


def scratch_copy(live: Engine, config: Config, bodies: list[WaterBodyConfig], folder: Path) -> Engine:
    """A fresh SQLite store in ``folder`` holding the live store's readings of ``bodies``."""
    scratch = open_store(f"sqlite:///{folder / 'replay.sqlite'}")
    stations = replay_stations(config, bodies)
    if live.dialect.name == "sqlite" and live.url.database not in (None, "", ":memory:"):
        _attach_copy(live, scratch, stations)
        return scratch
    r, f = schema.readings, schema.driver_forecasts
    _copy(live, scratch, schema.ingest_batches)
    _copy(live, scratch, r, r.c.station_id.in_(stations))
    _copy(live, scratch, f, f.c.station_id.in_(stations))
    return scratch


def analysis_days(first: dt.datetime, last: dt.datetime) -> list[dt.datetime]:
    """Daily analysis times from ``first`` to ``last`` inclusive (aware UTC)."""
    return list(pd.date_range(first, last, freq="1D").to_pydatetime())


def current_levels(engine: Engine, bodies: Iterable[WaterBodyConfig]) -> dict[tuple[str, str], int]:
    """The alert level in force per (water body, basin) (0 where none is stored)."""
    ids = {wb.id for wb in bodies}
    st = schema.alert_status
    with engine.connect() as conn:
        rows = conn.execute(select(st.c.water_body_id, st.c.basin_id, st.c.level)
                            .where(st.c.water_body_id.in_(ids))).all()
    return {(w, b): int(lv) for w, b, lv in rows}


def replay(config: Config, live: Engine, days: list[dt.datetime], *, only: list[str] | None = None,
           season_start: dt.datetime | None = None, folder: Path | None = None,
           progress: Callable[[dt.datetime], None] | None = None) -> tuple[Engine, list[ReplayDay]]:
    """Run the daily cycle at each of ``days`` in a scratch copy of ``live``; returns (scratch, days).

    ``folder`` holds the scratch store (a new temporary folder by default;
    the caller owns it). ``season_start`` is the start of the first cold
    start (default: one day before the first analysis), as in the service.
    """
    bodies = [wb for wb in config.water_bodies if only is None or wb.id in only]
    folder = Path(folder) if folder is not None else Path(tempfile.mkdtemp(prefix="bloomline-replay-"))
    folder.mkdir(parents=True, exist_ok=True)
    scratch = scratch_copy(live, config, bodies, folder)
    start = season_start or (days[0] - dt.timedelta(days=1))
    service = Service(config, engine=scratch, transport=DiscardTransport(), clock=lambda: days[0], replay=True)
    out: list[ReplayDay] = []
    try:
        for day in days:
            service.clock = lambda day=day: day
            summaries = service.run_cycles(day, only=[wb.id for wb in bodies], season_start=start)
            out.append(ReplayDay(day, summaries, current_levels(scratch, bodies)))
            if progress is not None:
                progress(day)
    finally:
        service.close(dispose_engine=False)
    return scratch, out
