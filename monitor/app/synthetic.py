"""Synthetic many-lakes stores: N invented water bodies with a season of readings, for tests and benchmarks.

Everything is invented and seeded: water bodies are named "Synthetic Lake
0001" …, each with 1–5 basins in a chain (each flowing into the next, the
last to the outlet), one buoy per basin (chlorophyll fluorescence,
phycocyanin, water temperature), one inflow gauge (discharge, nitrate,
SRP, daily) and a weather station shared by each group of
``LAKES_PER_WEATHER_STATION`` lakes (air temperature, shortwave radiation).
The readings are smooth seasonal curves with a bloom of random size and
timing and multiplicative noise; their shapes are plausible (common
practice), not a model of any real lake, and the forecasts they produce are
not meant to be skilful, only to exercise the service at scale.

:func:`config_data` gives the configuration as the dict a TOML file would
parse into (:func:`monitor.config.parse_config`); :func:`write_readings`
inserts the season directly into a store in bulk (PostgreSQL ``COPY``,
SQLite ``executemany``), under one ingest batch, all readings QC-passed
(flag 1), bypassing the feeds: the generator feeds the cycle, not ingest.
"""

from __future__ import annotations

import datetime as dt
import io
from collections.abc import Iterator

import numpy as np
from sqlalchemy import insert
from sqlalchemy.engine import Engine

from monitor.config import Config, WaterBodyConfig
from monitor.store import schema
from monitor.timeutil import UTC, naive_utc

LAKES_PER_WEATHER_STATION = 10
BUOY_VARIABLES = ("chlorophyll_fluorescence", "phycocyanin", "water_temperature")
GAUGE_VARIABLES = ("discharge", "nitrate", "srp")
WEATHER_VARIABLES = ("air_temperature", "shortwave_radiation")
SOURCE = "synthetic"


def lake_id(i: int) -> str:
    """The id of the ``i``-th synthetic water body (1-based)."""
    return f"synthetic-{i:04d}"


def config_data(n: int, *, seed: int = 20260601, database_url: str = "sqlite:///synthetic.sqlite",
                members: int = 30, horizon_days: int = 7, dask_scheduler: str | None = None) -> dict:
    """The configuration of ``n`` synthetic water bodies as a parsed-TOML dict.

    Basin sizes and the number of basins (1–5) are drawn from ``seed``; the
    same arguments give the same dict.
    """
    if n < 1:
        raise ValueError(f"expected at least one water body, got {n}")
    rng = np.random.default_rng([seed, 0])
    water_bodies, stations = [], []
    for w in range((n + LAKES_PER_WEATHER_STATION - 1) // LAKES_PER_WEATHER_STATION):
        stations.append({"id": f"SYN-MET-{w + 1:03d}", "kind": "weather", "variables": list(WEATHER_VARIABLES)})
    for i in range(1, n + 1):
        wid = lake_id(i)
        n_basins = int(rng.integers(1, 6))
        basins = []
        for b in range(n_basins):
            depth = float(np.round(rng.uniform(2.0, 15.0), 1))
            area = float(np.round(rng.uniform(0.2e6, 3.0e6), -3))
            basins.append({"id": f"b{b + 1}", "name": f"Basin {b + 1}", "volume_m3": area * depth,
                           "mean_depth_m": depth, "area_m2": area,
                           "flows_to": f"b{b + 2}" if b + 1 < n_basins else "outlet"})
            stations.append({"id": f"SYN-{i:04d}-B{b + 1}", "kind": "buoy", "water_body": wid, "basin": f"b{b + 1}",
                             "variables": list(BUOY_VARIABLES)})
        stations.append({"id": f"SYN-{i:04d}-G", "kind": "gauge", "water_body": wid, "variables": list(GAUGE_VARIABLES)})
        use = "drinking-water" if rng.random() < 0.3 else "recreation"
        water_bodies.append({
            "id": wid, "name": f"Synthetic Lake {i:04d}", "use": use, "timezone": "UTC",
            "weather_station": f"SYN-MET-{(i - 1) // LAKES_PER_WEATHER_STATION + 1:03d}",
            "alerts": {"horizon_days": horizon_days}, "basins": basins,
            "inflows": [{"id": "inflow", "name": "Inflow", "basin": "b1", "gauge": f"SYN-{i:04d}-G"}]})
    service = {"database": database_url}
    if dask_scheduler:
        service["dask_scheduler"] = dask_scheduler
    return {"service": service, "filter": {"members": members, "spin_up_cycles": 0},
            "water_bodies": water_bodies, "stations": stations}


def _lake_rows(config: Config, wb: WaterBodyConfig, index: int, seed: int, start: dt.datetime, days: int,
               cadence_minutes: int) -> Iterator[tuple[str, str, dt.datetime, float]]:
    """(station, variable, time, value) of one lake's buoys and gauge over the season."""
    rng = np.random.default_rng([seed, 1, index])
    hours = np.arange(0, days * 24 * 60, cadence_minutes) / 60.0
    times = [start + dt.timedelta(hours=float(h)) for h in hours]
    day = hours / 24.0
    base = rng.uniform(2.0, 25.0)                 # [µg/L] background chlorophyll-a
    peak_day, width = rng.uniform(0.3, 1.0) * days, rng.uniform(3.0, 10.0)
    size = rng.uniform(0.0, 6.0)                  # bloom height as a multiple of the background
    cyano = rng.uniform(0.2, 0.6)                 # cyanobacteria share of chlorophyll-a
    temp0 = rng.uniform(14.0, 22.0)               # [°C]
    for b, basin in enumerate(wb.basins):
        station = config.stations_of(wb.id, basin=basin.id)[0].id
        bloom = 1.0 + size * np.exp(-0.5 * ((day - peak_day - 2 * b) / width) ** 2)
        chl = base * bloom * rng.lognormal(0.0, 0.15, day.size)
        pc = cyano * base * bloom * rng.lognormal(0.0, 0.2, day.size)
        temp = temp0 + 3.0 * np.sin(2 * np.pi * day / 60.0) + 0.5 * np.sin(2 * np.pi * (day - 0.6)) \
            - 0.1 * basin.mean_depth_m + rng.normal(0.0, 0.1, day.size)
        for variable, values in zip(BUOY_VARIABLES, (chl, pc, temp)):
            yield from ((station, variable, t, float(v)) for t, v in zip(times, values))
    gauge = wb.inflows[0].gauge
    daily = [start + dt.timedelta(days=d) for d in range(days)]
    flow = rng.uniform(0.2, 3.0) * rng.lognormal(0.0, 0.3, days)
    nitrate = rng.uniform(300.0, 1500.0) * rng.lognormal(0.0, 0.1, days)
    srp = rng.uniform(5.0, 40.0) * rng.lognormal(0.0, 0.15, days)
    for variable, values in zip(GAUGE_VARIABLES, (flow, nitrate, srp)):
        yield from ((gauge, variable, t, float(v)) for t, v in zip(daily, values))


def _weather_rows(station: str, index: int, seed: int, start: dt.datetime, days: int
                  ) -> Iterator[tuple[str, str, dt.datetime, float]]:
    rng = np.random.default_rng([seed, 2, index])
    hours = np.arange(0, days * 24)
    times = [start + dt.timedelta(hours=int(h)) for h in hours]
    air = rng.uniform(14.0, 22.0) + 5.0 * np.sin(2 * np.pi * (hours / 24.0 - 0.375)) + rng.normal(0.0, 1.0, hours.size)
    cloud = np.repeat(rng.uniform(0.3, 1.0, days), 24)
    shortwave = 850.0 * np.clip(np.sin(2 * np.pi * (hours / 24.0 - 0.25)), 0.0, None) * cloud
    for variable, values in zip(WEATHER_VARIABLES, (air, shortwave)):
        yield from ((station, variable, t, float(v)) for t, v in zip(times, values))


def season_rows(config: Config, *, seed: int, start: dt.datetime, days: int,
                cadence_minutes: int = 60) -> Iterator[tuple[str, str, dt.datetime, float]]:
    """Every (station, variable, aware UTC time, value) reading of the synthetic season."""
    for i, st in enumerate(s for s in config.stations if s.kind == "weather"):
        yield from _weather_rows(st.id, i, seed, start, days)
    for i, wb in enumerate(config.water_bodies):
        yield from _lake_rows(config, wb, i, seed, start, days, cadence_minutes)


def write_readings(engine: Engine, config: Config, *, seed: int = 20260601,
                   start: dt.datetime = dt.datetime(2026, 6, 1, tzinfo=UTC), days: int = 30,
                   cadence_minutes: int = 60, received_at: dt.datetime | None = None, source: str = SOURCE) -> int:
    """Insert the synthetic season (buoys every ``cadence_minutes``, gauges daily, weather hourly)
    into a migrated store, in bulk under one ingest batch received at ``received_at`` (default
    ``start``) with ``source`` as the readings' source; returns the number of readings."""
    if start.tzinfo is None:
        raise ValueError("start must be an aware UTC datetime")
    received = received_at or start
    with engine.begin() as conn:
        batch_id = conn.execute(insert(schema.ingest_batches).values(
            feed=source, origin="monitor.app.synthetic", sha256="0" * 64, archive_path=None, received_at=received,
            status="ok", message="synthetic season", received=0, accepted=0)).inserted_primary_key[0]
        rows = season_rows(config, seed=seed, start=start, days=days, cadence_minutes=cadence_minutes)
        if engine.dialect.name == "postgresql":
            n = _copy_postgres(conn, rows, batch_id, source)
        else:
            n = 0
            chunk: list[dict] = []
            for st, var, t, v in rows:
                chunk.append(dict(station_id=st, variable=var, time_utc=t, value=v, qc_flag=1, qc_tests="",
                                  source=source, batch_id=batch_id, censored=0))
                if len(chunk) >= 50_000:
                    conn.execute(insert(schema.readings), chunk)
                    n += len(chunk)
                    chunk = []
            if chunk:
                conn.execute(insert(schema.readings), chunk)
                n += len(chunk)
        conn.execute(schema.ingest_batches.update().where(schema.ingest_batches.c.id == batch_id)
                     .values(received=n, accepted=n))
    return n


def _copy_postgres(conn, rows, batch_id: int, source: str) -> int:
    """COPY the rows into ``readings`` (PostgreSQL): tens of times faster than INSERT for millions of rows."""
    cursor = conn.connection.driver_connection.cursor()
    n = 0
    columns = "station_id, variable, time_utc, value, qc_flag, qc_tests, source, batch_id, censored"
    with cursor.copy(f"COPY readings ({columns}) FROM STDIN") as copy:
        buf = io.StringIO()
        for st, var, t, v in rows:
            buf.write(f"{st}\t{var}\t{naive_utc(t).isoformat(sep=' ')}\t{v!r}\t1\t\t{source}\t{batch_id}\t0\n")
            n += 1
            if n % 100_000 == 0:
                copy.write(buf.getvalue())
                buf = io.StringIO()
        copy.write(buf.getvalue())
    return n
