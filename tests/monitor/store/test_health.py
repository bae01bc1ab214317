"""The health read models: a job failing repeatedly, a stale feed, a silent scheduler, dead messages."""

from __future__ import annotations

import datetime as dt

import pytest
from sqlalchemy import insert, update

from monitor.alerting.outbox import enqueue
from monitor.store import jobs
from monitor.store import lease as lease_rows
from monitor.store.db import open_store
from monitor.store.health import health_report, job_runs_list, job_summary
from monitor.store.schema import ingest_batches, outbox
from tests.monitor.conftest import NOW, fernwater


@pytest.fixture
def setup(tmp_path):
    config = fernwater(tmp_path)
    engine = open_store(config.service.database_url)
    yield config, engine
    engine.dispose()


def run(engine, job, outcome, *, wb=None, at=NOW, error=None):
    run_id = jobs.start_job(engine, job, now=at, owner="host:1", water_body_id=wb)
    if outcome != "running":
        jobs.finish_job(engine, run_id, now=at, outcome=outcome, duration_s=0.1, error=error)
    return run_id


def fresh_batches(engine, at=NOW):
    with engine.begin() as conn:
        for feed in ("buoys", "lab", "forecasts", "utility"):
            conn.execute(insert(ingest_batches).values(feed=feed, origin="x", sha256=feed, received_at=at, status="ok",
                                                       message=""))


def test_a_job_is_failing_after_its_last_n_runs_all_failed(setup):
    _config, engine = setup
    for outcome in ("ok", "failed", "failed"):
        run(engine, "cycle", outcome, wb="fernwater", error="compute failed: boom")
    (summary,) = job_summary(engine, max_failures=3)
    assert (summary["failures_in_a_row"], summary["failing"]) == (2, False)
    run(engine, "cycle", "failed", wb="fernwater", error="compute failed: boom")
    (summary,) = job_summary(engine, max_failures=3)
    assert (summary["failures_in_a_row"], summary["failing"]) == (3, True)
    run(engine, "cycle", "ok", wb="fernwater")
    assert job_summary(engine, max_failures=3)[0]["failing"] is False


def test_healthy_store_has_no_problems(setup):
    config, engine = setup
    fresh_batches(engine)
    run(engine, "ingest", "ok")
    report = health_report(engine, config, now=NOW + dt.timedelta(hours=1))
    assert report["ok"] and report["problems"] == []


def test_each_kind_of_problem_is_named(setup):
    config, engine = setup
    fresh_batches(engine, at=NOW - dt.timedelta(hours=30))
    for _ in range(3):
        run(engine, "send", "failed", error="ConnectionRefusedError: refused")
    assert lease_rows.take(engine, "scheduler", "host:9", now=NOW - dt.timedelta(minutes=10), seconds=30,
                           force=False) == 1
    with engine.begin() as conn:
        enqueue(conn, recipient="a@b.example", subject="s", body="b", now=NOW)
        conn.execute(update(outbox).values(status="dead"))
    report = health_report(engine, config, now=NOW, max_failures=3, stale_after=dt.timedelta(hours=24))
    text = "\n".join(report["problems"])
    assert not report["ok"]
    assert "job send failed 3 times in a row; last error: ConnectionRefusedError: refused" in text
    assert "feed buoys is stale: last data 30.0 h ago" in text
    assert "scheduler host:9 has not sent a heartbeat for 600 s" in text
    assert "1 outbox message(s) dead" in text


def test_a_released_lease_is_not_a_silent_scheduler(setup):
    config, engine = setup
    fresh_batches(engine)
    term = lease_rows.take(engine, "scheduler", "host:9", now=NOW - dt.timedelta(hours=2), seconds=30, force=False)
    lease_rows.release(engine, "scheduler", "host:9", term, now=NOW - dt.timedelta(hours=2))
    assert health_report(engine, config, now=NOW)["ok"]


def test_job_runs_are_listed_newest_first_and_paged(setup):
    _config, engine = setup
    ids = [run(engine, "ingest", "ok") for _ in range(5)]
    page = job_runs_list(engine, limit=2)
    assert [r["id"] for r in page] == ids[:-3:-1]
    assert [r["id"] for r in job_runs_list(engine, limit=2, before_id=page[-1]["id"])] == ids[-3:-5:-1]


def test_runs_left_running_by_a_dead_process_are_marked_interrupted(setup):
    _config, engine = setup
    mine = run(engine, "cycle", "running", wb="fernwater")
    jobs.start_job(engine, "send", now=NOW, owner="host:2")
    assert jobs.interrupt_unfinished(engine, owner="host:2", now=NOW) == 1
    outcomes = {r["id"]: r["outcome"] for r in job_runs_list(engine)}
    assert outcomes[mine] == "interrupted" and sorted(outcomes.values()) == ["interrupted", "running"]
