"""The demo season end to end, checked against its own data.

Runs ``bloomline demo --no-serve --json`` once in a temporary folder and
checks the summary against the feeds and the store: every row accounted for,
every rejected row with a reason, a forecast for every basin, the status page
with the caution, and an early warning for the upstream arm without a false
alarm on the recreational lake.
"""

from __future__ import annotations

import csv
import datetime as dt
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from sqlalchemy import func, select

from monitor.alerting.caution import CAUTION
from monitor.app.cli import main
from monitor.config import load_config
from monitor.store import schema
from monitor.store.db import connect
from monitor.store.readings import readings_frame

pytestmark = pytest.mark.slow

FEEDS = Path(__file__).resolve().parents[3] / "sample_feeds"


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    workdir = tmp_path_factory.mktemp("demo")
    result = CliRunner().invoke(main, ["demo", "--no-serve", "--json", "--workdir", str(workdir)])
    assert result.exit_code == 0, result.output + repr(result.exception)
    summary = json.loads(result.stdout.strip().splitlines()[-1])
    config = load_config(workdir / "bloomline.toml")
    return summary, config, connect(config.service.database_url)


def _expected_counts(config) -> tuple[int, int]:
    """Readings the feed files hold, counted independently of the parser.

    A data line with the header's number of fields and a time in the feed's
    format holds one reading per value column (wide) or one (long), each
    stored or rejected on its own (a cell that is not a number, missing or
    below detection is one rejected value); any other line is one rejected
    row. Returns (readings received, rejections).
    """
    from monitor.ingest.feeds.csv_folder import feed_files

    total = rejected = 0
    for feed in config.feeds:
        for path in feed_files(feed):
            with open(path, newline="", encoding="utf-8", errors="replace") as fh:
                rows = [r for r in csv.reader(fh) if r]  # blank lines hold nothing
            header, body = rows[0], rows[1:]
            value_cols = list(feed.columns) if feed.layout == "wide" else [feed.value_column]
            idx = [header.index(c) for c in value_cols if c in header]
            t_idx = header.index(feed.time_column)
            for r in body:
                if len(r) == len(header) and _time_ok(r[t_idx], feed.time_format):
                    total += len(idx)  # each cell a reading, or one rejected value
                    rejected += sum(not _value_ok(r[i]) for i in idx)
                else:
                    total += 1
                    rejected += 1
    return total, rejected


def _time_ok(text: str, fmt: str) -> bool:
    try:
        if fmt == "iso":
            pd.Timestamp(text)
        else:
            dt.datetime.strptime(text, fmt)
        return True
    except ValueError:
        return False


def _value_ok(text: str) -> bool:
    text = text.strip()
    # empty cells and the usual markers are missing readings (common practice)
    if text.lower() in ("", "na", "n/a", "nan", "null", "none") or text.startswith("<"):
        return True
    try:
        return np.isfinite(float(text))
    except ValueError:
        return False


def test_every_feed_row_is_accepted_rejected_or_a_duplicate(demo):
    summary, config, engine = demo
    r = summary["readings"]
    assert r["received"] == r["accepted"] + r["rejected"] + r["duplicate"]
    # the demo's files, read here without Bloomline's parser
    assert (r["received"], r["rejected"]) == _expected_counts(config)
    with engine.connect() as conn:
        stored = conn.execute(select(func.count()).select_from(schema.readings)).scalar()
        forecasts = conn.execute(select(func.count()).select_from(schema.driver_forecasts)).scalar()
        kept = conn.execute(select(func.count()).select_from(schema.rejected_rows)).scalar()
    assert kept == r["rejected"] > 0
    assert stored + forecasts == r["accepted"]
    assert r["duplicate"] > 0  # the scenario repeats some rows on purpose


def test_every_rejected_row_has_a_reason_and_its_raw_text(demo):
    _, _, engine = demo
    with engine.connect() as conn:
        rows = conn.execute(select(schema.rejected_rows)).all()
    assert rows
    assert all(row.reason.strip() and row.raw is not None for row in rows)


def test_every_basin_has_a_forecast_for_every_day_of_the_horizon(demo):
    summary, config, engine = demo
    with engine.connect() as conn:
        for wb in config.water_bodies:
            run = conn.execute(select(schema.forecast_runs.c.id).where(schema.forecast_runs.c.water_body_id == wb.id)
                               .order_by(schema.forecast_runs.c.analysis_utc.desc()).limit(1)).scalar()
            assert run is not None
            for basin in wb.basins:
                days = conn.execute(select(func.count(func.distinct(schema.forecast_values.c.valid_utc))).where(
                    (schema.forecast_values.c.run_id == run) & (schema.forecast_values.c.basin_id == basin.id))).scalar()
                assert days == wb.alerts.horizon_days + 1, (wb.id, basin.id)
    assert summary["cycles"].get("failed", 0) == 0


def test_summary_names_the_framework_of_each_water_body(demo):
    summary, _, _ = demo
    frameworks = {wb["id"]: wb["framework"] for wb in summary["water_bodies"]}
    assert frameworks == {"corrisdale": "who-1999-drinking-water", "sorrel-lake": "who-2003-recreation"}
    assert summary["caution"] == CAUTION


def test_status_page_answers_with_the_caution(demo):
    from web import create_app

    _, config, _ = demo
    client = create_app(config).test_client()
    page = client.get("/")
    assert page.status_code == 200
    text = page.get_data(as_text=True)
    assert "Corrisdale Reservoir" in text and "Sorrel Lake" in text
    assert "not a substitute for sampling" in text


def _first_observed_day(engine, station: str, threshold: float) -> dt.datetime | None:
    """First day whose QC-passed daily mean phycocyanin reaches ``threshold`` [µg/L]."""
    frame = readings_frame(engine, stations=[station], variables=["phycocyanin"], max_flag=1)
    daily = frame.set_index("time_utc")["value"].resample("1D").mean().dropna()
    above = daily[daily >= threshold]
    return above.index[0].to_pydatetime() if len(above) else None


def _level_at(changes, when: dt.datetime) -> int:
    """The alert level in force at ``when`` from the list of changes (0 before the first)."""
    level = 0
    for c in changes:
        if dt.datetime.fromisoformat(c["time_utc"]) <= when:
            level = c["to_level"]
    return level


def test_upstream_arm_is_warned_at_least_two_days_before_it_is_observed_at_each_level(demo):
    summary, config, engine = demo
    wb = config.water_body("corrisdale")
    changes = [c for c in summary["alert_changes"] if c["water_body"] == "corrisdale" and c["basin"] == "fennick-arm"]
    checked = 0
    for level in wb.alerts.levels:
        observed = _first_observed_day(engine, "CR-FA", level.chlorophyll_ugL)
        if observed is None:
            continue
        # The warning in force when the observed daily mean first reaches the level
        # must have been in force, without a break, for the two days before.
        for hours in range(0, 49, 6):
            when = observed - dt.timedelta(hours=hours)
            assert _level_at(changes, when) >= level.number, (
                f"{level.name} not in force at {when} ({hours} h before the first observed day {observed:%Y-%m-%d})")
        checked += 1
    assert checked == len(wb.alerts.levels)  # the scenario's bloom reaches both levels


def test_recreational_lake_gets_no_alert_while_it_stays_clear(demo):
    summary, _, engine = demo
    assert _first_observed_day(engine, "SL-01", 10.0) is None  # the scenario's lake stays clear
    assert [c for c in summary["alert_changes"] if c["water_body"] == "sorrel-lake"] == []


def test_a_hindcast_of_the_demo_issues_the_same_runs_as_the_demo(demo, tmp_path):
    """The replay runs the service's own cycle: the first three weeks, run for run, byte for byte."""
    from monitor.verification.replay import replay

    _, config, engine = demo
    runs, values = schema.forecast_runs, schema.forecast_values
    with engine.connect() as conn:
        days = sorted({r for (r,) in conn.execute(select(runs.c.analysis_utc))})[:21]
    scratch, _ = replay(config, engine, days, season_start=days[0] - dt.timedelta(days=1), folder=tmp_path)

    def issued(store):
        with store.connect() as conn:
            rows = conn.execute(select(runs.c.water_body_id, runs.c.analysis_utc, runs.c.status,
                                       values.c.basin_id, values.c.valid_utc, values.c.quantity,
                                       values.c.statistic, values.c.value)
                                .join(values, values.c.run_id == runs.c.id)
                                .where(runs.c.analysis_utc <= days[-1])).all()
        return sorted(rows)

    replayed = issued(scratch)
    assert len(replayed) > 0 and replayed == issued(engine)
    scratch.dispose()
