"""The service's jobs: recorded runs, structured logs, stopping between units, catch-up after downtime,
HTTP-pull state kept across a restart, and the service clock driving APScheduler's triggers."""

from __future__ import annotations

import datetime as dt
import io
import json
import logging
import shutil
from pathlib import Path

import pytest
from apscheduler.triggers.cron import CronTrigger
from apscheduler.triggers.interval import IntervalTrigger
from sqlalchemy import insert, select

from monitor.alerting.transports import MailboxTransport
from monitor.app.clock import ClockTrigger, ServiceClock
from monitor.app.logs import JsonFormatter
from monitor.app.service import Service, latest_cycle_time
from monitor.config import load_config
from monitor.forecasting import cycle
from monitor.store import schema
from monitor.store.health import job_runs_list
from tests.monitor.conftest import NOW, fernwater
from tests.monitor.ingest.test_feeds_http import Server

SAMPLE = Path(__file__).resolve().parents[3] / "sample_feeds"
ANALYSIS = dt.datetime(2026, 6, 2, tzinfo=dt.UTC)
UTC = dt.UTC


def _service(tmp_path, *, catch_up: str | None = None, now=ANALYSIS) -> Service:
    shutil.copytree(SAMPLE / "lab", tmp_path / "feeds" / "lab")
    text = (SAMPLE / "bloomline.toml").read_text()
    if catch_up:
        text = text.replace("[schedule]\n", f'[schedule]\ncatch_up = "{catch_up}"\n')
    (tmp_path / "bloomline.toml").write_text(text)
    return Service(load_config(tmp_path / "bloomline.toml"), transport=MailboxTransport(tmp_path / "mailbox"),
                   clock=lambda: now)


def _runs_at(service: Service, times: dict[str, dt.datetime]) -> None:
    with service.engine.begin() as conn:
        for wb, t in times.items():
            conn.execute(insert(schema.forecast_runs).values(water_body_id=wb, analysis_utc=t, created_at=t,
                                                             status="ok", message=""))


# ---------------------------------------------------------------- job records and logs


def test_each_water_bodys_cycle_is_a_recorded_job_run_with_its_outcome(tmp_path, monkeypatch):
    service = _service(tmp_path)
    real = cycle.compute

    def compute(inputs):
        if inputs.water_body_id == "sorrel-lake":
            raise RuntimeError("compute broken on purpose")
        return real(inputs)

    monkeypatch.setattr(cycle, "compute", compute)
    service.run_cycles(ANALYSIS, season_start=ANALYSIS - dt.timedelta(days=1))
    runs = {r["water_body"]: r for r in job_runs_list(service.engine, job="cycle")}
    assert set(runs) == {"corrisdale", "sorrel-lake"}
    assert runs["corrisdale"]["outcome"] == "ok" and runs["corrisdale"]["counts"]["status"] != "failed"
    assert runs["sorrel-lake"]["outcome"] == "failed" and "compute broken on purpose" in runs["sorrel-lake"]["error"]
    assert all(r["scheduled_utc"] == ANALYSIS.isoformat() and r["duration_s"] >= 0 for r in runs.values())


def test_jobs_log_one_json_object_per_event_with_job_and_water_body(tmp_path):
    service = _service(tmp_path)
    stream = io.StringIO()
    handler = logging.StreamHandler(stream)
    handler.setFormatter(JsonFormatter())
    logger = logging.getLogger("bloomline")
    logger.addHandler(handler)
    old_level = logger.level
    logger.setLevel(logging.INFO)
    try:
        service.send_mail()
    finally:
        logger.removeHandler(handler)
        logger.setLevel(old_level)
    events = [json.loads(line) for line in stream.getvalue().splitlines()]
    assert [e["event"] for e in events] == ["job.started", "job.finished"]
    assert {e["job"] for e in events} == {"send"} and events[1]["outcome"] == "ok"
    assert events[1]["counts"]["sent"] == 0 and "time" in events[1] and events[1]["level"] == "info"
    (run,) = job_runs_list(service.engine, job="send")
    assert (run["outcome"], run["counts"]["sent"]) == ("ok", 0)


def test_a_stopping_service_leaves_the_remaining_water_bodies_for_the_next_run(tmp_path, monkeypatch):
    service = _service(tmp_path)
    real = cycle.gather

    def gather(engine, config, wb, analysis, **kw):
        service.stopping.set()  # SIGTERM arrives during the first water body's cycle
        return real(engine, config, wb, analysis, **kw)

    monkeypatch.setattr(cycle, "gather", gather)
    summaries = service.run_cycles(ANALYSIS, season_start=ANALYSIS - dt.timedelta(days=1))
    assert [s["water_body"] for s in summaries] == ["corrisdale"]  # its cycle finished, the next did not start
    assert summaries[0]["run_id"] is not None
    assert [r["water_body"] for r in job_runs_list(service.engine, job="cycle")] == ["corrisdale"]


# ---------------------------------------------------------------- catch-up after downtime


def test_latest_cycle_time_is_today_or_yesterday_at_the_configured_time():
    assert latest_cycle_time(dt.datetime(2026, 7, 3, 7, 0, tzinfo=UTC), "06:00") == dt.datetime(2026, 7, 3, 6, tzinfo=UTC)
    assert latest_cycle_time(dt.datetime(2026, 7, 3, 5, 59, tzinfo=UTC), "06:00") == dt.datetime(2026, 7, 2, 6,
                                                                                                 tzinfo=UTC)


def test_after_downtime_one_catch_up_cycle_per_water_body_by_default(tmp_path):
    service = _service(tmp_path, now=dt.datetime(2026, 6, 10, 9, 0, tzinfo=UTC))
    _runs_at(service, {"corrisdale": dt.datetime(2026, 6, 5, tzinfo=UTC), "sorrel-lake": dt.datetime(2026, 6, 10,
                                                                                                      tzinfo=UTC)})
    assert service.due_cycles() == {dt.datetime(2026, 6, 10, tzinfo=UTC): ["corrisdale"]}


def test_each_missed_day_when_asked(tmp_path):
    service = _service(tmp_path, catch_up="each-day", now=dt.datetime(2026, 6, 10, 9, 0, tzinfo=UTC))
    _runs_at(service, {"corrisdale": dt.datetime(2026, 6, 7, tzinfo=UTC), "sorrel-lake": dt.datetime(2026, 6, 10,
                                                                                                      tzinfo=UTC)})
    assert service.due_cycles() == {dt.datetime(2026, 6, d, tzinfo=UTC): ["corrisdale"] for d in (8, 9, 10)}


def test_run_due_cycles_runs_each_due_cycle_once_and_stops_when_none_is_due(tmp_path, monkeypatch):
    service = _service(tmp_path, now=dt.datetime(2026, 6, 10, 9, 0, tzinfo=UTC))
    calls = []

    def run_cycles(analysis, *, only=None, season_start=None):
        calls.append((analysis, tuple(only)))
        if "sorrel-lake" in only:
            _runs_at(service, {"sorrel-lake": analysis})  # corrisdale fails without storing a run
        return []

    monkeypatch.setattr(service, "run_cycles", run_cycles)
    service.run_due_cycles()
    assert calls == [(dt.datetime(2026, 6, 10, tzinfo=UTC), ("corrisdale", "sorrel-lake"))]


# ---------------------------------------------------------------- HTTP-pull state across a restart


def test_pull_state_survives_a_restart(tmp_path):
    with Server() as server:
        feed = {"name": "utility-pull", "kind": "http-pull", "url": server.url + "/data.csv", "layout": "long",
                "time_column": "time", "station_column": "station", "every_minutes": 10.0, "timeout_s": 2.0}
        config = fernwater(tmp_path, feeds=[feed])
        first = Service(config, clock=lambda: NOW)
        assert [r.accepted for r in first.poll_feeds()] == [2]
        first.close()
        # a new process: not due yet (the stored next attempt), then a conditional request
        restarted = Service(config, clock=lambda: NOW + dt.timedelta(minutes=5))
        assert restarted.poll_feeds() == [] and len(server.requests) == 1
        restarted.clock = lambda: NOW + dt.timedelta(minutes=10)
        assert restarted.poll_feeds() == []
        assert server.requests[-1]["if-none-match"].startswith('"')
        with restarted.engine.connect() as conn:
            state = conn.execute(select(schema.pull_states)).one()
        assert state.failures == 0 and "not modified" in state.history[-1]
        restarted.close()


def test_pull_back_off_survives_a_restart(tmp_path):
    with Server() as server:
        feed = {"name": "utility-pull", "kind": "http-pull", "url": server.url + "/broken", "layout": "long",
                "time_column": "time", "station_column": "station", "every_minutes": 10.0, "timeout_s": 2.0}
        config = fernwater(tmp_path, feeds=[feed])
        for k in range(3):  # three failures in a row: the third waits 10 · 2² = 40 min
            s = Service(config, clock=lambda k=k: NOW + dt.timedelta(minutes=[0, 10, 30][k]))
            s.poll_feeds()
            s.close()
        assert len(server.requests) == 3
        s = Service(config, clock=lambda: NOW + dt.timedelta(minutes=69))
        s.poll_feeds()
        assert len(server.requests) == 3  # still backing off after the restart
        with s.engine.connect() as conn:
            state = conn.execute(select(schema.pull_states)).one()
        assert state.failures == 3 and state.next_attempt_utc == NOW + dt.timedelta(minutes=70)
        s.close()


# ---------------------------------------------------------------- the service clock


def test_a_fast_clock_fires_the_daily_cycle_at_the_wall_time_of_service_midnight():
    anchor = 1_800_000_000.0
    clock = ServiceClock(dt.datetime(2026, 7, 1, 23, 59, tzinfo=UTC), speed=3600.0, anchor=anchor)  # 1 s = 1 h
    wall0 = dt.datetime.fromtimestamp(anchor, UTC)
    trigger = ClockTrigger(clock, CronTrigger(hour=0, minute=0, timezone="UTC"))
    first = trigger.get_next_fire_time(None, wall0)
    midnight = dt.datetime(2026, 7, 2, tzinfo=UTC)
    # fired no earlier than service midnight (a job then reads the new day), within a service second
    assert midnight <= clock.to_service(first) < midnight + dt.timedelta(seconds=1)
    assert (first - wall0).total_seconds() == pytest.approx(60 / 3600, abs=1e-6)
    second = trigger.get_next_fire_time(first, first)
    assert clock.to_service(second).replace(microsecond=0) == midnight + dt.timedelta(days=1)  # not the same day
    assert (second - first).total_seconds() == pytest.approx(24.0, abs=1e-6)


def test_an_interval_in_service_time_is_shorter_in_wall_time():
    anchor = 1_800_000_000.0
    clock = ServiceClock(dt.datetime(2026, 7, 1, tzinfo=UTC), speed=600.0, anchor=anchor)
    wall0 = dt.datetime.fromtimestamp(anchor, UTC)
    trigger = ClockTrigger(clock, IntervalTrigger(minutes=15, start_date=clock.to_service(wall0), timezone="UTC"))
    times = [trigger.get_next_fire_time(None, wall0)]
    for _ in range(3):
        times.append(trigger.get_next_fire_time(times[-1], times[-1]))
    assert [round((b - a).total_seconds(), 3) for a, b in zip(times, times[1:])] == [1.5, 1.5, 1.5]  # 15 min / 600


def test_the_wall_clock_leaves_triggers_unchanged():
    clock = ServiceClock()
    inner = CronTrigger(hour=6, minute=0, timezone="UTC")
    now = dt.datetime(2026, 7, 1, 5, 0, tzinfo=UTC)
    assert ClockTrigger(clock, inner).get_next_fire_time(None, now) == inner.get_next_fire_time(None, now)


@pytest.mark.slow
def test_cycles_on_a_local_dask_cluster_are_recorded_per_water_body(tmp_path):
    service = _service(tmp_path)
    from dataclasses import replace

    service.config = replace(service.config, service=replace(service.config.service, dask_scheduler="local"))
    try:
        summaries = service.run_cycles(ANALYSIS, season_start=ANALYSIS - dt.timedelta(days=1))
    finally:
        service.close()
    assert [s["water_body"] for s in summaries] == ["corrisdale", "sorrel-lake"]
    assert all(s["status"] != "failed" and s["run_id"] is not None for s in summaries)
    runs = job_runs_list(service.engine, job="cycle")
    assert sorted((r["water_body"], r["outcome"]) for r in runs) == [("corrisdale", "ok"), ("sorrel-lake", "ok")]
