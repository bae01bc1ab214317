"""Fixtures for the web app: ``app`` and ``client`` over a temporary SQLite store.

The store holds one small invented water body, Quillmere (a recreational
lake with two basins), and forecast runs written straight into the tables
the way the cycle writes them.
"""

from __future__ import annotations

import datetime as dt

import pytest
from sqlalchemy import insert

from monitor.config import parse_config
from monitor.store.db import open_store
from monitor.store.schema import forecast_runs, forecast_values, ingest_batches, readings, water_bodies

UTC = dt.UTC
ANALYSIS = dt.datetime(2026, 8, 10, 6, 0, tzinfo=UTC)
NOW = ANALYSIS + dt.timedelta(hours=1)


def quillmere_config(tmp_path, **alerts):
    """The Config of the invented test lake, store and mailbox under ``tmp_path``."""
    data = {
        "service": {"database": f"sqlite:///{tmp_path / 'web.sqlite'}", "mailbox_dir": str(tmp_path / "mailbox"),
                    "base_url": "http://bloomline.test"},
        "water_bodies": [{
            "id": "quillmere", "name": "Quillmere", "use": "recreation", "timezone": "Etc/GMT-2",
            "basins": [
                {"id": "west", "name": "West Bay", "volume_m3": 2.0e6, "mean_depth_m": 3.0, "area_m2": 6.7e5,
                 "flows_to": "east"},
                {"id": "east", "name": "East Bay", "volume_m3": 3.0e6, "mean_depth_m": 4.0, "area_m2": 7.5e5},
            ],
            "alerts": {"framework": "who-2003-recreation", "warn_probability": 0.5, "horizon_days": 3,
                       "clear_after_cycles": 2},
        }],
        "stations": [
            {"id": "QW-1", "kind": "buoy", "water_body": "quillmere", "basin": "west",
             "variables": ["phycocyanin", "chlorophyll_fluorescence"]},
            {"id": "QE-1", "kind": "buoy", "water_body": "quillmere", "basin": "east",
             "variables": ["phycocyanin"]},
        ],
        "subscribers": [{"name": "Ada Quill", "email": "ada@quillmere.example", "water_bodies": ["quillmere"]}],
    }
    for k, v in alerts.items():
        data["water_bodies"][0]["alerts"][k] = v
    return parse_config(data)


def write_run(engine, water_body_id, analysis_utc, basins: dict, *, status="ok", message="", horizon=3):
    """Store a forecast run: ``basins[basin] = (median per day, [p_level_1 per day], [p_level_2 …])``.

    Quantiles are spread around the median by fixed factors; each day k runs
    0..horizon. Returns the run id.
    """
    with engine.begin() as conn:
        run_id = conn.execute(insert(forecast_runs).values(
            water_body_id=water_body_id, analysis_utc=analysis_utc, created_at=analysis_utc, status=status,
            message=message, diagnostics={"n_obs": 4, "spread": 0.3})).inserted_primary_key[0]
        rows = []
        for basin, (median, *probs) in basins.items():
            for k in range(horizon + 1):
                t = analysis_utc + dt.timedelta(days=k)
                m = median[k]
                for stat, f in (("q05", 0.5), ("q25", 0.8), ("q50", 1.0), ("q75", 1.25), ("q95", 1.8),
                                ("mean", 1.1)):
                    rows.append(dict(run_id=run_id, basin_id=basin, valid_utc=t,
                                     quantity="cyanobacteria_chlorophyll", statistic=stat, value=m * f))
                    rows.append(dict(run_id=run_id, basin_id=basin, valid_utc=t, quantity="total_chlorophyll",
                                     statistic=stat, value=2 * m * f))
                for n, p in enumerate(probs, start=1):
                    rows.append(dict(run_id=run_id, basin_id=basin, valid_utc=t,
                                     quantity="cyanobacteria_chlorophyll", statistic=f"p_level_{n}", value=p[k]))
        conn.execute(insert(forecast_values), rows)
    return int(run_id)


def write_readings(engine, station_id, values: list[tuple[dt.datetime, float, int]], variable="phycocyanin"):
    """Store readings (time, value, QC flag) of one station in a batch of their own."""
    with engine.begin() as conn:
        batch = conn.execute(insert(ingest_batches).values(
            feed="test", origin="conftest", sha256="0" * 64, received_at=NOW, status="ok", message="",
            received=len(values), accepted=len(values))).inserted_primary_key[0]
        conn.execute(insert(readings), [dict(station_id=station_id, variable=variable, time_utc=t, value=v,
                                             qc_flag=flag, qc_tests="", source="test", batch_id=batch)
                                        for t, v, flag in values])


@pytest.fixture
def config(tmp_path):
    return quillmere_config(tmp_path)


@pytest.fixture
def engine(config):
    engine = open_store(config.service.database_url)
    with engine.begin() as conn:
        conn.execute(insert(water_bodies).values(id="quillmere", name="Quillmere", use="recreation",
                                                 timezone="Etc/GMT-2", framework="who-2003-recreation"))
    yield engine
    engine.dispose()


@pytest.fixture
def seeded(engine):
    """Two days of runs: West Bay heading for guidance level 1, East Bay quiet; readings for both."""
    earlier = ANALYSIS - dt.timedelta(days=1)
    write_run(engine, "quillmere", earlier, {
        "west": ([5.0, 6.0, 7.0, 8.0], [0.05, 0.1, 0.2, 0.3], [0.0] * 4),
        "east": ([1.0, 1.0, 1.1, 1.1], [0.0] * 4, [0.0] * 4)})
    run_id = write_run(engine, "quillmere", ANALYSIS, {
        "west": ([7.0, 9.0, 11.0, 13.0], [0.2, 0.45, 0.62, 0.8], [0.0, 0.0, 0.01, 0.02]),
        "east": ([1.2, 1.3, 1.3, 1.4], [0.0, 0.01, 0.01, 0.02], [0.0] * 4)})
    day = dt.timedelta(days=1)
    quarter = dt.timedelta(minutes=15)
    west = [(ANALYSIS - 2 * day + i * quarter, 6.0 + 0.01 * i, 1) for i in range(8 * 24)]
    west.append((ANALYSIS - dt.timedelta(hours=1, seconds=-1), 500.0, 4))  # a failed spike, never shown
    write_readings(engine, "QW-1", west)
    write_readings(engine, "QE-1", [(ANALYSIS - day + i * quarter, 0.8, 1) for i in range(4 * 24)])
    return run_id


@pytest.fixture
def app(config, engine, seeded):
    from web import create_app

    return create_app(config, clock=lambda: NOW)


@pytest.fixture
def client(app):
    return app.test_client()


@pytest.fixture
def analysis_utc():
    """Analysis time of the latest seeded run."""
    return ANALYSIS


def csrf_token(client, url: str = "/subscribe") -> str:
    """The CSRF token of the form on the page at ``url`` (the session cookie stays in ``client``)."""
    import re

    html = client.get(url).get_data(as_text=True)
    match = re.search(r'name="csrf_token" value="([^"]+)"', html)
    assert match, f"no CSRF token in the form at {url}"
    return match.group(1)


def post_form(client, url: str, data: dict, *, form_page: str | None = None, **kwargs):
    """POST ``data`` to ``url`` as a browser would: with the token of the form on ``form_page`` (default ``url``)."""
    return client.post(url, data={**data, "csrf_token": csrf_token(client, form_page or url)}, **kwargs)
