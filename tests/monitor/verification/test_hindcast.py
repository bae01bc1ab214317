"""The hindcast: no look-ahead, the live store untouched, pairs that match the feed files."""

from __future__ import annotations

import csv
import datetime as dt
import json
import sqlite3
from contextlib import closing

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from sqlalchemy import delete, func, insert, select, update

from monitor.app.cli import main
from monitor.store import schema
from monitor.store.db import open_store
from monitor.verification.replay import analysis_days, replay

UTC = dt.UTC
FIRST = dt.datetime(2026, 6, 1, 6, 0, tzinfo=UTC)


def _issued(engine) -> dict:
    """Every stored run's values and members, by analysis time: what a forecast issued."""
    runs, vals, mem = schema.forecast_runs, schema.forecast_values, schema.forecast_members
    with engine.connect() as conn:
        times = dict(conn.execute(select(runs.c.id, runs.c.analysis_utc)).all())
        values = conn.execute(select(vals).order_by(*vals.primary_key.columns)).all()
        members = conn.execute(select(mem).order_by(*mem.primary_key.columns)).all()
    out: dict = {}
    for row in values:
        out.setdefault(times[row.run_id], []).append(tuple(row)[1:])
    for row in members:
        out.setdefault(times[row.run_id], []).append(tuple(row)[1:])
    return out


def test_changing_readings_after_an_issue_time_leaves_its_forecasts_and_baselines_identical(brackenfold, tmp_path):
    config, engine, folder = brackenfold
    days = analysis_days(FIRST, FIRST + dt.timedelta(days=5))
    scratch, _ = replay(config, engine, days, folder=tmp_path / "a")
    before = _issued(scratch)
    scratch.dispose()
    cut = days[2]

    # a copy of the store whose readings after the cut are changed, deleted, or arrive late
    with closing(sqlite3.connect(folder / "brackenfold.sqlite")) as src, \
            closing(sqlite3.connect(tmp_path / "changed.sqlite")) as dst:
        src.backup(dst)  # the live store is in WAL mode: copy it through SQLite, not as a file
    changed = open_store(f"sqlite:///{tmp_path / 'changed.sqlite'}")
    r = schema.readings
    with changed.begin() as conn:
        conn.execute(update(r).where(r.c.time_utc > cut).values(value=r.c.value * 3.0))
        conn.execute(delete(r).where((r.c.time_utc > cut + dt.timedelta(days=1)) & (r.c.variable == "srp")))
        batch = conn.execute(select(func.max(r.c.batch_id))).scalar()
        conn.execute(insert(r).values(station_id="BF-SITE", variable="chlorophyll_a",
                                      time_utc=cut + dt.timedelta(hours=1), value=99.0, qc_flag=1, qc_tests="",
                                      source="late-lab-report", batch_id=batch))
    scratch2, _ = replay(config, changed, days[:3], folder=tmp_path / "b")
    after = _issued(scratch2)
    assert set(after) == set(days[:3])
    for day in days[:3]:
        assert after[day] == before[day], f"the run issued at {day} changed"
    forecasters = {row[2] for row in after[days[0]] if len(row) == 7}
    assert {"bloomline", "persistence", "persistence_ensemble", "statistical"} <= forecasters
    scratch2.dispose()
    changed.dispose()


def _live_counts(engine) -> dict:
    with engine.connect() as conn:
        return {t: conn.execute(select(func.count()).select_from(schema.metadata.tables[t])).scalar()
                for t in ("readings", "forecast_runs", "forecast_values", "checkpoints", "alert_events", "outbox")}


def _lab_daily_mean(folder, day_end: dt.datetime) -> tuple[float, int]:
    """The window's mean chlorophyll-a straight from the feed file (local UTC+1), read with csv."""
    values = []
    for path in sorted((folder / "data").glob("brackenfold_*.csv")):
        with open(path, newline="") as fh:
            for row in csv.DictReader(fh):
                if row["variable"] != "chlorophyll_a":
                    continue
                t = dt.datetime.strptime(row["time"], "%Y-%m-%d %H:%M").replace(
                    tzinfo=dt.timezone(dt.timedelta(hours=1)))
                if day_end - dt.timedelta(days=1) < t <= day_end:
                    values.append(float(row["value"]))
    return float(np.mean(values)), len(values)


def test_hindcast_command_scores_against_the_feed_values_and_leaves_the_live_store_alone(brackenfold, tmp_path):
    config, engine, folder = brackenfold
    before = _live_counts(engine)
    out = tmp_path / "pairs.csv"
    result = CliRunner().invoke(main, ["hindcast", "--config", str(folder / "bloomline.toml"), "--from", "2026-06-01",
                                       "--to", "2026-06-08", "--json", "--out", str(out)])
    assert result.exit_code == 0, result.output + repr(result.exception)
    summary = json.loads(result.stdout.strip().splitlines()[-1])
    assert _live_counts(engine) == before
    assert summary["origins"] == 8 and summary["pairs"] > 0
    forecasters = {row["forecaster"] for row in summary["by_lead"]}
    assert {"bloomline", "persistence", "persistence_ensemble", "statistical"} <= forecasters
    assert {row["lead_days"] for row in summary["by_lead"]} == set(range(1, 8))

    pairs = pd.read_csv(out)
    for column in ("origin_utc", "valid_utc", "water_body", "basin_id", "quantity", "lead_days", "observed",
                   "observed_n", "bloomline_mean", "bloomline_q05", "bloomline_q95", "bloomline_p_level_1",
                   "persistence_q50", "persistence_ensemble_q50", "statistical_q50"):
        assert column in pairs.columns
    assert set(pairs.quantity) == {"total_chlorophyll"}  # no phycocyanin at this lake
    for _, row in pairs.sample(5, random_state=1).iterrows():
        value, n = _lab_daily_mean(folder, pd.Timestamp(row.valid_utc).to_pydatetime())
        assert row.observed == pytest.approx(value, rel=1e-9) and row.observed_n == n
        origin, valid = pd.Timestamp(row.origin_utc), pd.Timestamp(row.valid_utc)
        assert (valid - origin) == pd.Timedelta(days=int(row.lead_days))
        # persistence repeats the last value observed at or before the origin
        last_day = max(d for d in pd.to_datetime(pairs.valid_utc) if d <= origin) if (
            pd.to_datetime(pairs.valid_utc) <= origin).any() else None
        if last_day is not None and last_day == origin:
            assert row.persistence_q50 == pytest.approx(_lab_daily_mean(folder, origin.to_pydatetime())[0], rel=1e-5)


@pytest.mark.parametrize("args, message", [
    (["--water-body", "no-such-lake"], "unknown water body 'no-such-lake'"),
    (["--from", "1 June"], "expected a date as YYYY-MM-DD"),
])
def test_hindcast_refuses_unknown_ids_and_bad_dates(brackenfold, args, message):
    _, _, folder = brackenfold
    result = CliRunner().invoke(main, ["hindcast", "--config", str(folder / "bloomline.toml"), *args])
    assert result.exit_code == 2
    assert message in result.output
