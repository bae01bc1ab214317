"""The scheduled service: its three jobs, and a failing job does not stop the schedule."""

from __future__ import annotations

import datetime as dt
import logging
import shutil
from pathlib import Path

from apscheduler.schedulers.background import BackgroundScheduler

from monitor.alerting.transports import MailboxTransport
from monitor.app.scheduler import build_scheduler
from monitor.app.service import Service
from monitor.config import load_config

SAMPLE = Path(__file__).resolve().parents[3] / "sample_feeds"


def _service(tmp_path) -> Service:
    shutil.copytree(SAMPLE / "lab", tmp_path / "feeds" / "lab")
    shutil.copyfile(SAMPLE / "bloomline.toml", tmp_path / "bloomline.toml")
    config = load_config(tmp_path / "bloomline.toml")
    now = dt.datetime(2026, 11, 2, tzinfo=dt.UTC)
    return Service(config, transport=MailboxTransport(tmp_path / "mailbox"), clock=lambda: now)


def test_scheduler_has_ingest_cycle_and_send_jobs_at_the_configured_times(tmp_path):
    service = _service(tmp_path)
    scheduler = build_scheduler(service, BackgroundScheduler(timezone="UTC"))
    jobs = {job.id: job for job in scheduler.get_jobs()}
    assert set(jobs) == {"ingest", "cycle", "send", "webhooks"}
    assert "hour='0'" in str(jobs["cycle"].trigger) and "minute='0'" in str(jobs["cycle"].trigger)
    assert jobs["ingest"].trigger.trigger.interval == dt.timedelta(minutes=15)
    assert jobs["send"].trigger.trigger.interval == jobs["webhooks"].trigger.trigger.interval == dt.timedelta(minutes=1)
    # [schedule] misfire_grace_minutes defaults to 60: a cycle up to an hour late still runs
    assert jobs["cycle"].misfire_grace_time == 3600 and jobs["cycle"].coalesce
    assert {job.name for job in jobs.values()} == set(jobs)  # named jobs, not "run" four times


def test_ingest_job_loads_new_drop_folder_files_once(tmp_path):
    service = _service(tmp_path)
    jobs = {job.id: job for job in build_scheduler(service, BackgroundScheduler(timezone="UTC")).get_jobs()}
    jobs["ingest"].func()
    first = service.engine.connect().exec_driver_sql("select count(*) from readings").scalar()
    jobs["ingest"].func()
    again = service.engine.connect().exec_driver_sql("select count(*) from readings").scalar()
    assert first > 400 and again == first


def test_a_failing_job_is_logged_and_the_schedule_goes_on(tmp_path, caplog, monkeypatch):
    service = _service(tmp_path)
    jobs = {job.id: job for job in build_scheduler(service, BackgroundScheduler(timezone="UTC")).get_jobs()}

    def broken():
        raise RuntimeError("disk on fire")

    monkeypatch.setattr(service, "send_mail", broken)
    with caplog.at_level(logging.ERROR, logger="bloomline"):
        jobs["send"].func()  # must not raise
    assert "job send failed; it runs again at its next time" in caplog.text
    assert "disk on fire" in caplog.text
