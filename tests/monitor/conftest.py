"""Fixtures for the ingest tests: an invented lake, its feeds, and stores on SQLite and PostgreSQL.

Fernwater (``fernwater``) is a fictional lake with one basin ``north``, a
buoy FW-1, a lab site FW-LAB in the same basin, a gauge FW-G and a weather
station FW-MET. Each PostgreSQL store lives in a schema of its own, created
and dropped by the fixture, so test runs do not collide.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import uuid
from pathlib import Path

import pytest
from sqlalchemy import create_engine, text

from monitor.config import parse_config
from monitor.store.db import connect, upgrade

UTC = dt.UTC
NOW = dt.datetime(2026, 9, 1, 12, 0, tzinfo=UTC)

BUOY_COLUMNS = {
    "chl": {"variable": "chlorophyll_fluorescence", "unit": "ug/L"},
    "pc": {"variable": "phycocyanin", "unit": "ug/L"},
    "pc_rfu": {"variable": "phycocyanin", "unit": "RFU"},
    "temp": {"variable": "water_temperature", "unit": "degC"},
}


def fernwater(tmp_path: Path, database: str | None = None, feeds: list[dict] | None = None,
              qc: dict | None = None, station_qc: dict | None = None, climatology: dict | None = None):
    """The Config of the invented test lake, with store and archive under ``tmp_path``."""
    drop = tmp_path / "drop"
    drop.mkdir(exist_ok=True)
    default_feeds = [
        {"name": "buoys", "kind": "csv-folder", "path": str(drop), "pattern": "*/*.csv", "layout": "wide",
         "time_column": "timestamp", "time_format": "%Y-%m-%d %H:%M", "timezone": "Etc/GMT-2",
         "station_from_folder": True, "columns": BUOY_COLUMNS},
        {"name": "lab", "kind": "csv-folder", "path": str(tmp_path / "lab"), "layout": "long",
         "time_column": "sampled_at", "time_format": "%Y-%m-%d %H:%M", "timezone": "Etc/GMT-2",
         "station_column": "site", "below_detection": "half"},
        {"name": "forecasts", "kind": "csv-folder", "path": str(tmp_path / "fc"), "layout": "wide",
         "role": "weather-forecast", "time_column": "valid_utc", "issued_column": "issued_utc",
         "station": "FW-MET", "columns": {"air_temp_c": {"variable": "air_temperature", "unit": "degC"},
                                          "wind_ms": {"variable": "wind_speed", "unit": "m/s"}}},
        {"name": "utility", "kind": "push", "token": "s3cret-token-for-tests", "format": "json", "layout": "long",
         "station_column": "station"},
    ]
    data = {
        "service": {"database": database or f"sqlite:///{tmp_path / 'store.sqlite'}",
                    "archive_dir": str(tmp_path / "archive")},
        "water_bodies": [{"id": "fernwater", "name": "Fernwater", "use": "recreation", "timezone": "Etc/GMT-2",
                          "basins": [{"id": "north", "volume_m3": 2e6, "mean_depth_m": 4.0, "area_m2": 5e5}]}],
        "stations": [
            {"id": "FW-1", "kind": "buoy", "water_body": "fernwater", "basin": "north",
             "variables": ["chlorophyll_fluorescence", "phycocyanin", "water_temperature"],
             "calibration": {"phycocyanin": {"unit": "RFU", "slope": 2.5, "intercept": -0.5}},
             **({"qc": station_qc} if station_qc else {}),
             **({"climatology": climatology} if climatology else {})},
            {"id": "FW-LAB", "kind": "lab", "water_body": "fernwater", "basin": "north",
             "variables": ["chlorophyll_a", "nitrate", "srp", "microcystin"]},
            {"id": "FW-G", "kind": "gauge", "variables": ["discharge", "nitrate"]},
            {"id": "FW-MET", "kind": "weather", "variables": ["air_temperature", "wind_speed"]},
        ],
        "feeds": feeds if feeds is not None else default_feeds,
        **({"qc": qc} if qc else {}),
    }
    return parse_config(data, tmp_path / "bloomline.toml")


@pytest.fixture
def sqlite_engine(tmp_path):
    engine = connect(f"sqlite:///{tmp_path / 'store.sqlite'}")
    upgrade(engine)
    yield engine
    engine.dispose()


@pytest.fixture
def pg_engine(postgres_url):
    """A migrated PostgreSQL store in a fresh schema, dropped afterwards."""
    schema = f"bl_test_{uuid.uuid4().hex[:10]}"
    admin = create_engine(postgres_url)
    try:
        with admin.begin() as conn:
            conn.execute(text(f'CREATE SCHEMA "{schema}"'))
    except Exception as exc:  # the server answers but refuses: a clear failure, not a skip
        admin.dispose()
        pytest.fail(f"cannot create a test schema on {postgres_url}: {exc}")
    engine = create_engine(postgres_url, connect_args={"options": f"-csearch_path={schema}"})
    try:
        upgrade(engine)
        yield engine
    finally:
        engine.dispose()
        with admin.begin() as conn:
            conn.execute(text(f'DROP SCHEMA "{schema}" CASCADE'))
        admin.dispose()


@pytest.fixture(params=["sqlite", "postgresql"])
def engine(request, tmp_path):
    """The same store on both backends."""
    if request.param == "sqlite":
        yield request.getfixturevalue("sqlite_engine")
    else:
        yield request.getfixturevalue("pg_engine")


def buoy_csv(rows: list[tuple], header: str = "timestamp,chl,pc,temp") -> bytes:
    """A wide buoy file from (local time string, chl, pc, temp) tuples; None = empty cell."""
    lines = [header]
    for row in rows:
        lines.append(",".join("" if x is None else str(x) for x in row))
    return ("\n".join(lines) + "\n").encode()


def quarter_hours(start: str, n: int) -> list[str]:
    """n local time strings 15 minutes apart from ``start`` ("YYYY-MM-DD HH:MM")."""
    t0 = dt.datetime.strptime(start, "%Y-%m-%d %H:%M")
    return [(t0 + dt.timedelta(minutes=15 * i)).strftime("%Y-%m-%d %H:%M") for i in range(n)]


def lab_csv(config, *rows: str):
    """(fernwater's lab feed reading ISO times, a CSV payload of ``rows`` under its header)."""
    feed = dataclasses.replace(config.feed("lab"), time_format="iso")
    return feed, ("sampled_at,site,variable,value,unit\n" + "".join(r + "\n" for r in rows)).encode()
