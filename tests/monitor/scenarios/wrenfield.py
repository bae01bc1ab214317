"""Wrenfield Water, an invented drinking-water reservoir for the what-if tests, with a few days of
readings and two daily cycles in a temporary store.

Two basins, the shallow Upper Arm (fed by the invented Wren Brook) flowing into the Lower Basin
at the outlet; a buoy in each basin, a gauge on the brook and a weather station. Readings are
generated here from a seeded generator; nothing is real.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
from sqlalchemy import insert

from monitor.alerting.transports import MailboxTransport
from monitor.app.service import Service
from monitor.config import load_config
from monitor.store.schema import ingest_batches, readings

UTC = dt.UTC
#: The analysis of the second cycle: the "today" of the tests.
ANALYSIS = dt.datetime(2026, 8, 12, tzinfo=UTC)
FIRST = ANALYSIS - dt.timedelta(days=1)


CONFIG = """
[service]
database = "sqlite:///{database}"
mailbox_dir = "{mailbox}"
base_url = "http://bloomline.test"

[filter]
members = {members}
spin_up_cycles = 0

[[water_bodies]]
id = "wrenfield"
name = "Wrenfield Water"
use = "drinking-water"
timezone = "Etc/GMT-2"
weather_station = "WR-MET"
alerts = {{ framework = "who-1999-drinking-water", horizon_days = 5, warn_probability = 0.3 }}

[[water_bodies.basins]]
id = "upper-arm"
name = "Upper Arm"
volume_m3 = 2.0e6
mean_depth_m = 3.0
area_m2 = 6.7e5
flows_to = "lower-basin"

[[water_bodies.basins]]
id = "lower-basin"
name = "Lower Basin"
volume_m3 = 8.0e6
mean_depth_m = 10.0
area_m2 = 8.0e5

[[water_bodies.inflows]]
id = "wren-brook"
name = "Wren Brook"
basin = "upper-arm"
gauge = "WR-G"

[[stations]]
id = "WR-U"
kind = "buoy"
water_body = "wrenfield"
basin = "upper-arm"
variables = ["phycocyanin", "chlorophyll_fluorescence", "water_temperature"]

[[stations]]
id = "WR-L"
kind = "buoy"
water_body = "wrenfield"
basin = "lower-basin"
variables = ["phycocyanin", "chlorophyll_fluorescence", "water_temperature"]

[[stations]]
id = "WR-G"
kind = "gauge"
water_body = "wrenfield"
variables = ["discharge", "nitrate", "srp"]

[[stations]]
id = "WR-MET"
kind = "weather"
variables = ["air_temperature", "shortwave_radiation"]

[[subscribers]]
name = "Ivo Wren"
email = "ivo@wrenfield.example"
water_bodies = ["wrenfield"]
"""


def wrenfield_config(tmp_path, members: int = 20, *, database: str = "wren.sqlite"):
    """The Config of Wrenfield Water, written to ``tmp_path/bloomline.toml`` (store and mailbox beside it)."""
    path = tmp_path / "bloomline.toml"
    path.write_text(CONFIG.format(database=(tmp_path / database).as_posix(), mailbox=(tmp_path / "mailbox").as_posix(),
                                  members=members))
    return load_config(path)


def _write(engine, rows: list[dict]) -> None:
    with engine.begin() as conn:
        batch = conn.execute(insert(ingest_batches).values(
            feed="test", origin="wrenfield", sha256="0" * 64, received_at=ANALYSIS, status="ok", message="",
            received=len(rows), accepted=len(rows))).inserted_primary_key[0]
        conn.execute(insert(readings), [dict(r, qc_flag=1, qc_tests="", source="test", batch_id=batch)
                                        for r in rows])


def seed_readings(engine, days: int = 16, seed: int = 3) -> None:
    """Hourly buoy and weather readings and daily gauge readings up to ANALYSIS (invented, seeded)."""
    rng = np.random.default_rng(seed)
    start = ANALYSIS - dt.timedelta(days=days)
    rows = []
    for h in range(days * 24):
        t = start + dt.timedelta(hours=h)
        day = h / 24
        sun = max(0.0, np.sin(2 * np.pi * ((h % 24) / 24 - 0.25)))
        rows += [dict(station_id="WR-MET", variable="air_temperature", time_utc=t,
                      value=20 + 4 * sun + rng.normal(0, 0.5)),
                 dict(station_id="WR-MET", variable="shortwave_radiation", time_utc=t, value=750 * sun)]
        for st, base, pc in (("WR-U", 23.0, 18.0), ("WR-L", 21.0, 3.0)):
            rows += [dict(station_id=st, variable="water_temperature", time_utc=t, value=base + 0.5 * sun),
                     dict(station_id=st, variable="phycocyanin", time_utc=t,
                          value=pc * np.exp(0.05 * day + rng.normal(0, 0.05))),
                     dict(station_id=st, variable="chlorophyll_fluorescence", time_utc=t,
                          value=1.6 * pc * np.exp(0.05 * day + rng.normal(0, 0.05)))]
    for d in range(days):
        t = start + dt.timedelta(days=d, hours=8)
        rows += [dict(station_id="WR-G", variable="discharge", time_utc=t, value=0.6),
                 dict(station_id="WR-G", variable="nitrate", time_utc=t, value=900.0),
                 dict(station_id="WR-G", variable="srp", time_utc=t, value=25.0)]
    _write(engine, rows)


def wrenfield_store(tmp_path, members: int = 20):
    """(config, service) with readings and two daily cycles, the second at ANALYSIS."""
    config = wrenfield_config(tmp_path, members)
    service = Service(config, transport=MailboxTransport(tmp_path / "mailbox"), clock=lambda: ANALYSIS)
    seed_readings(service.engine)
    for day in (FIRST, ANALYSIS):
        summaries = service.run_cycles(day, season_start=FIRST - dt.timedelta(days=1))
        assert summaries[0]["status"] in ("ok", "degraded"), summaries
    return config, service
