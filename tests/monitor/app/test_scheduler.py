"""The scheduled service: its three jobs, and a failing job does not stop the schedule."""

from __future__ import annotations

import datetime as dt
import logging
import shutil
import time
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


def test_an_smtp_server_that_never_answers_data_does_not_block_the_other_jobs(tmp_path):
    from dataclasses import replace

    from monitor.alerting.outbox import enqueue
    from monitor.alerting.transports import SmtpTransport
    from monitor.app.clock import ServiceClock
    from monitor.store.health import job_runs_list
    from tests.monitor.receivers import HungSmtpServer, WebhookReceiver

    hung, receiver = HungSmtpServer(), WebhookReceiver("w" * 20)
    try:
        shutil.copytree(SAMPLE / "lab", tmp_path / "feeds" / "lab")
        shutil.copyfile(SAMPLE / "bloomline.toml", tmp_path / "bloomline.toml")
        config = load_config(tmp_path / "bloomline.toml")
        hook = parse_webhook(receiver.url)
        config = replace(config, webhooks=(hook,), smtp=replace(config.smtp, host="127.0.0.1", port=hung.port,
                                                                timeout_s=6.0))
        # 1 s = 30 service minutes: ingest every 0.5 s, send and webhooks every 2 ms
        clock = ServiceClock(dt.datetime(2026, 11, 2, tzinfo=dt.UTC), speed=1800.0)
        service = Service(config, transport=SmtpTransport(config.smtp), clock=clock)
        now = clock()
        with service.engine.begin() as conn:
            enqueue(conn, recipient="ops@corrisdale.example.org", subject="s", body="b", now=now)
            enqueue(conn, recipient="utility", subject="forecast.issued", body='{"id":"k1"}', now=now,
                    channel="webhook", message_key="k1")
        scheduler = build_scheduler(service, BackgroundScheduler(timezone="UTC"), clock=clock)
        scheduler.start()
        try:
            deadline = time.monotonic() + 5.0
            while time.monotonic() < deadline and not (receiver.processed and len(
                    [r for r in job_runs_list(service.engine, job="ingest") if r["outcome"] == "ok"]) >= 2):
                time.sleep(0.05)
            send_runs = job_runs_list(service.engine, job="send")
            # the send round is still waiting for DATA's answer while the others go on
            assert hung.data_commands == 1 and [r["outcome"] for r in send_runs] == ["running"]
            assert list(receiver.processed) == ["k1"]
            assert len([r for r in job_runs_list(service.engine, job="ingest") if r["outcome"] == "ok"]) >= 2
            deadline = time.monotonic() + 10
            while job_runs_list(service.engine, job="send")[-1]["outcome"] == "running":
                assert time.monotonic() < deadline
                time.sleep(0.1)
            first = job_runs_list(service.engine, job="send")[-1]
            assert first["outcome"] == "failed" and "timed out" in first["error"]
        finally:
            service.stopping.set()
            hung.close()  # ends the hung connection, so a round in hand ends too
            scheduler.shutdown(wait=True)
        service.close()
    finally:
        receiver.close()


def parse_webhook(url):
    from monitor.config import WebhookConfig

    return WebhookConfig(name="utility", url=url, secret="w" * 20, water_bodies=())
