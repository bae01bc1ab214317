"""Operations commands and the command line's input checks: health, outbox, prune, backup, cycle."""

from __future__ import annotations

import datetime as dt
import json
import sqlite3
from pathlib import Path

import pytest
from click.testing import CliRunner
from sqlalchemy import func, insert, select, text, update

from monitor.alerting.outbox import enqueue
from monitor.app.cli import main
from monitor.config import load_config
from monitor.store import jobs
from monitor.store.db import open_store
from monitor.store.schema import checkpoints, ingest_batches, job_runs, outbox, water_bodies
from monitor.timeutil import now_utc

SAMPLE = Path(__file__).resolve().parents[3] / "sample_feeds" / "bloomline.toml"

TOML = """
[service]
database = "sqlite:///ops.sqlite"
archive_dir = "archive"
mailbox_dir = "mailbox"

[[water_bodies]]
id = "hollin"
name = "Hollin Mere"
use = "drinking-water"

[[water_bodies.basins]]
id = "arm"
name = "Reed Arm"
volume_m3 = 1e6
mean_depth_m = 4.0
area_m2 = 2.5e5

[[feeds]]
name = "drop"
kind = "csv-folder"
path = "drop"
"""


@pytest.fixture
def store(tmp_path):
    path = tmp_path / "bloomline.toml"
    path.write_text(TOML)
    config = load_config(path)
    engine = open_store(config.service.database_url)
    with engine.begin() as conn:
        conn.execute(insert(water_bodies).values(id="hollin", name="Hollin Mere", use="drinking-water",
                                                 timezone="UTC", framework="who-1999-drinking-water"))
    yield path, config, engine
    engine.dispose()


def invoke(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def test_cycle_refuses_a_date_that_is_not_iso_8601():
    result = invoke("cycle", "--config", SAMPLE, "--at", "20 Aug 2026")
    assert result.exit_code == 2
    assert "Invalid value for '--at': expected an ISO 8601 date or time such as 2026-08-20" in result.output
    assert "Traceback" not in result.output


def test_cycle_refuses_an_unknown_water_body_and_names_the_known_ones():
    result = invoke("cycle", "--config", SAMPLE, "--water-body", "none-such")
    assert result.exit_code == 2
    assert "unknown water body 'none-such'; expected one of corrisdale, sorrel-lake" in result.output


def test_health_exits_1_and_names_the_problem_then_0_when_fixed(store):
    path, _config, engine = store
    result = invoke("health", "--config", path)
    assert result.exit_code == 1 and "feed drop is stale: no data received yet" in result.output
    with engine.begin() as conn:
        conn.execute(insert(ingest_batches).values(feed="drop", origin="x", sha256="a", received_at=now_utc(),
                                                   status="ok", message=""))
    result = invoke("health", "--config", path, "--json")
    assert result.exit_code == 0, result.output
    assert json.loads(result.output)["ok"] is True


def test_health_counts_a_job_failing_repeatedly(store):
    path, _config, engine = store
    with engine.begin() as conn:
        conn.execute(insert(ingest_batches).values(feed="drop", origin="x", sha256="a", received_at=now_utc(),
                                                   status="ok", message=""))
    for _ in range(2):
        run_id = jobs.start_job(engine, "send", now=now_utc(), owner="h:1")
        jobs.finish_job(engine, run_id, now=now_utc(), outcome="failed", duration_s=1, error="SMTP down")
    assert invoke("health", "--config", path).exit_code == 0  # two failures: not yet repeatedly (default 3)
    assert invoke("health", "--config", path, "--max-failures", "2").exit_code == 1


def test_outbox_status_shows_dead_messages_and_requeue_revives_them(store):
    path, _config, engine = store
    with engine.begin() as conn:
        ids = [enqueue(conn, recipient=f"r{i}@hollin.example", subject="s", body="b", now=now_utc()) for i in range(3)]
        conn.execute(update(outbox).where(outbox.c.id.in_(ids[:2])).values(status="dead", attempts=12,
                                                                          last_error="SMTPServerDisconnected"))
    result = invoke("outbox", "status", "--config", path)
    assert result.exit_code == 0
    assert "email: 2 dead, 1 pending" in result.output
    assert f"dead #{ids[0]} email to r0@hollin.example after 12 attempts: SMTPServerDisconnected" in result.output
    assert invoke("outbox", "requeue", "--config", path).exit_code == 2  # says which messages
    assert "1 message(s) requeued" in invoke("outbox", "requeue", "--config", path, "--id", ids[0]).output
    assert "1 message(s) requeued" in invoke("outbox", "requeue", "--config", path, "--all-dead").output
    status = json.loads(invoke("outbox", "status", "--config", path, "--json").output)
    assert status["counts"] == {"email": {"pending": 3}}


def test_prune_keeps_the_newest_checkpoints_and_recent_job_runs(store):
    path, _config, engine = store
    t0 = dt.datetime(2026, 7, 1, tzinfo=dt.UTC)
    with engine.begin() as conn:
        conn.execute(insert(checkpoints), [dict(water_body_id="hollin", time_utc=t0 + dt.timedelta(days=k),
                                                created_at=t0, data=b"x") for k in range(5)])
    old = jobs.start_job(engine, "ingest", now=now_utc() - dt.timedelta(days=100), owner="h:1")
    jobs.finish_job(engine, old, now=now_utc(), outcome="ok", duration_s=1)
    jobs.start_job(engine, "ingest", now=now_utc(), owner="h:1")
    result = invoke("prune", "--config", path, "--checkpoints-keep", "2", "--job-runs-days", "90")
    assert result.exit_code == 0, result.output
    assert json.loads(result.output) == {"checkpoints": {"hollin": 3}, "job_runs": 1}
    with engine.connect() as conn:
        kept = conn.execute(select(checkpoints.c.time_utc).order_by(checkpoints.c.time_utc)).scalars().all()
        assert conn.execute(select(func.count()).select_from(job_runs)).scalar() == 1
    assert kept == [t0 + dt.timedelta(days=3), t0 + dt.timedelta(days=4)]


def test_prune_of_the_archive_removes_only_payloads_all_of_whose_batches_are_old(store):
    path, config, engine = store
    archive = Path(config.service.archive_dir) / "drop" / "ab"
    archive.mkdir(parents=True)
    old_file, shared_file = archive / "old.csv", archive / "shared.csv"
    old_file.write_text("a")
    shared_file.write_text("b")
    long_ago = now_utc() - dt.timedelta(days=400)
    with engine.begin() as conn:
        for sha, file, when in (("1", old_file, long_ago), ("2", shared_file, long_ago), ("3", shared_file, now_utc())):
            conn.execute(insert(ingest_batches).values(feed="drop", origin="x", sha256=sha, archive_path=str(file),
                                                       received_at=when, status="ok", message=""))
    dry = json.loads(invoke("prune", "--config", path, "--archive-days", "365", "--dry-run").output)
    assert dry["archive"] == {"files": 1, "bytes": 1, "dry_run": True} and old_file.exists()
    done = json.loads(invoke("prune", "--config", path, "--archive-days", "365").output)
    assert done["archive"]["files"] == 1 and not old_file.exists() and shared_file.exists()


def test_backup_copies_a_consistent_snapshot_while_a_writer_holds_a_transaction(store, tmp_path):
    path, config, engine = store
    with engine.begin() as conn:
        enqueue(conn, recipient="committed@hollin.example", subject="s", body="b", now=now_utc())
    writer = engine.connect()
    tx = writer.begin()
    writer.execute(text("INSERT INTO water_bodies (id, name, use, timezone, framework) "
                        "VALUES ('mid', 'Mid', 'recreation', 'UTC', 'x')"))
    try:
        result = invoke("backup", "--config", path, tmp_path / "copy.sqlite")
    finally:
        tx.rollback()
        writer.close()
    assert result.exit_code == 0, result.output
    copy = sqlite3.connect(tmp_path / "copy.sqlite")
    try:
        assert copy.execute("PRAGMA integrity_check").fetchone() == ("ok",)
        assert copy.execute("SELECT recipient FROM outbox").fetchall() == [("committed@hollin.example",)]
        assert copy.execute("SELECT count(*) FROM water_bodies WHERE id = 'mid'").fetchone() == (0,)
    finally:
        copy.close()
    again = invoke("backup", "--config", path, tmp_path / "copy.sqlite")
    assert again.exit_code == 1 and "exists; choose a new file name" in again.output
