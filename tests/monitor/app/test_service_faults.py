"""The service as a whole under faults: a season replay through the real scheduler in a child process
with a fast-forwarded clock, SIGKILLed at random points and restarted, with a real SMTP server and a
webhook receiver on loopback; and SIGTERM / SIGINT finishing the current work before stopping."""

from __future__ import annotations

import datetime as dt
import random
import signal
import time
from collections import Counter

import pytest
from sqlalchemy import func, select

from monitor.app.clock import ServiceClock
from monitor.app.service import Service
from monitor.config import load_config
from monitor.store import schema
from monitor.store.db import connect
from tests.monitor.app.service_harness import (
    Dropper,
    ServiceProcess,
    consistency_problems,
    cycle_runs_by_owner,
    readings_set,
    reference_readings,
    replay_config,
)
from tests.monitor.receivers import SmtpRecorder, WebhookReceiver, start_smtp

pytestmark = pytest.mark.slow

UTC = dt.UTC
SECRET = "replay-webhook-secret-0123456789"
START = dt.datetime(2026, 7, 28, tzinfo=UTC)  # the Fennick Arm is past Alert Level 1, the Middle Reach crosses it soon
WALL_S_PER_DAY = 4.0
KILLS = 20


@pytest.fixture
def receivers():
    smtp = SmtpRecorder()
    controller = start_smtp(smtp)
    hook = WebhookReceiver(SECRET)
    yield smtp, controller.port, hook
    controller.stop()
    hook.close()


def _setup(tmp_path, smtp_port, hook_url, *, database=None, lease_seconds=3.0):
    folder = tmp_path / "service"
    folder.mkdir()
    path = replay_config(folder, database=database or f"sqlite:///{folder / 'bloomline.sqlite'}",
                         smtp_port=smtp_port, webhook_url=hook_url, webhook_secret=SECRET,
                         lease_seconds=lease_seconds)
    return folder, path


def _drain(config_path, clock):
    """Send what the last cycles queued, through Bloomline's own sender, until nothing is pending."""
    service = Service(load_config(config_path), clock=clock)
    try:
        for _ in range(20):
            service.send_mail()
            service.send_webhooks()
            with service.engine.connect() as conn:
                pending = conn.execute(select(func.count()).select_from(schema.outbox)
                                       .where(schema.outbox.c.status == "pending")).scalar()
            if not pending:
                return
            time.sleep(0.2)
    finally:
        service.close()


def _check_deliveries(engine, config, smtp: SmtpRecorder, hook: WebhookReceiver) -> dict:
    """Every alert change reached every receiver it concerns; any repeat was a repeat of an interrupted attempt."""
    box, attempts = schema.outbox, schema.delivery_attempts
    with engine.connect() as conn:
        rows = conn.execute(select(box)).all()
        events = conn.execute(select(schema.alert_events)).all()
        interrupted = {r.outbox_id for r in conn.execute(select(attempts.c.outbox_id)
                                                         .where(attempts.c.outcome == "sending"))}
    assert Counter(r.status for r in rows) == Counter({"sent": len(rows)}), "every message sent, none dead"
    emails, calls = smtp.by_key(), hook.by_event()
    repeats = 0
    for r in rows:
        got = emails.get(r.message_key, []) if r.channel == "email" else calls.get(r.message_key, [])
        assert got, f"outbox row {r.id} ({r.channel} to {r.recipient}) never arrived"
        if len(got) > 1:
            repeats += 1
            assert r.id in interrupted, f"{r.message_key} arrived {len(got)} times without an interrupted attempt"
            if r.channel == "email":
                assert len({m["Message-ID"] for m in got}) == 1
                assert len({m.get_body(preferencelist=("plain",)).get_content() for m in got}) == 1
                numbers = [int(m["X-Bloomline-Delivery-Attempt"]) for m in got]
            else:
                assert len({c["body"] for c in got}) == 1
                numbers = [int(c["headers"]["X-Bloomline-Delivery-Attempt"]) for c in got]
            assert len(set(numbers)) == len(numbers), "each repeat says it is a later attempt"
    subscribers = {s.email: s for s in config.subscribers}
    for e in events:
        level = max(e.from_level, e.to_level)
        for email_addr, sub in subscribers.items():
            if e.water_body_id in sub.water_bodies and sub.min_level <= level:
                assert any(m["To"] == email_addr and m["X-Bloomline-Idempotency-Key"].startswith(f"alert-{e.id}-")
                           for ms in emails.values() for m in ms), f"event {e.id} not emailed to {email_addr}"
        assert f"alert-{e.id}-utility" in hook.processed, f"event {e.id} not delivered to the webhook"
    assert all(c["reason"] != "signature does not match" for c in hook.requests)
    return {"events": len(events), "messages": len(rows), "repeats": repeats}


def test_a_season_replay_survives_repeated_sigkills(tmp_path, receivers):
    smtp, smtp_port, hook = receivers
    folder, path = _setup(tmp_path, smtp_port, hook.url)
    config = load_config(path)
    clock = ServiceClock(START - dt.timedelta(hours=3), speed=86400 / WALL_S_PER_DAY, anchor=time.time() + 2)
    dropper = Dropper(folder, clock, START.date() - dt.timedelta(days=14), START.date() + dt.timedelta(days=40))
    dropper.drop_due()  # the two weeks before the replay are there from the start
    dropper.start()
    rng = random.Random(20260728)
    engine_url = config.service.database_url
    kills, checks = 0, []
    try:
        while kills < KILLS:
            proc = ServiceProcess(path, clock)
            try:
                assert proc.wait_for("lease.acquired", 60), proc.log_text()[-3000:]
                time.sleep(rng.uniform(0.1, 2.5))
                proc.kill()
            finally:
                proc.close()
            kills += 1
            engine = connect(engine_url)
            problems = consistency_problems(engine, config)
            engine.dispose()
            assert problems == [], f"after kill {kills} at service time {clock()}: {problems}"
            checks.append(clock())
        dropper.stop()
        final = ServiceProcess(path, clock)
        try:
            assert final.wait_for("lease.acquired", 60)
            started = len([e for e in final.events if e.get("event") == "job.finished" and e["job"] == "ingest"])
            deadline = time.monotonic() + 60
            while len([e for e in final.events if e.get("event") == "job.finished" and e["job"] == "ingest"]) <= started:
                assert time.monotonic() < deadline, "no ingest round after the last files were dropped"
                time.sleep(0.2)
            code, took = final.terminate(signal.SIGTERM)
        finally:
            final.close()
        assert code == 0 and took < 15, (code, took, final.log_text()[-2000:])
    finally:
        dropper.stop()
    _drain(path, clock)
    engine = connect(engine_url)
    try:
        assert consistency_problems(engine, config) == []
        assert readings_set(engine) == reference_readings(folder, path)  # no reading lost, none twice
        delivered = _check_deliveries(engine, config, smtp, hook)
        assert delivered["events"] >= 2, delivered  # the replay saw alert changes to deliver
        with engine.connect() as conn:
            runs = conn.execute(select(func.count()).select_from(schema.forecast_runs)).scalar()
            left_running = conn.execute(select(func.count()).select_from(schema.job_runs)
                                        .where(schema.job_runs.c.outcome == "running")).scalar()
        assert runs >= 2 * 10 and left_running == 0
        # no cycle of a water body at one analysis time finished twice
        twice = {k: v for k, v in cycle_runs_by_owner(engine).items() if sum(o == "ok" for _, o in v) > 1}
        assert twice == {}
    finally:
        engine.dispose()
    assert kills >= 20 and len(checks) == kills


@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGINT], ids=["SIGTERM", "SIGINT"])
def test_sigterm_and_sigint_finish_the_current_cycle_and_stop_within_seconds(tmp_path, receivers, sig):
    smtp, smtp_port, hook = receivers
    folder, path = _setup(tmp_path, smtp_port, hook.url)
    # a slow clock: one cycle job at start (the catch-up), nothing else due for a while
    clock = ServiceClock(START + dt.timedelta(hours=1), speed=60.0, anchor=time.time() + 2)
    Dropper(folder, clock, START.date() - dt.timedelta(days=14), START.date()).drop_due()
    proc = ServiceProcess(path, clock)
    try:
        assert proc.wait_for("lease.acquired", 60), proc.log_text()[-3000:]
        deadline = time.monotonic() + 60
        while not any(e.get("event") == "job.started" and e.get("job") == "cycle" for e in proc.events):
            assert proc.proc.poll() is None and time.monotonic() < deadline, proc.log_text()[-3000:]
            time.sleep(0.05)
        code, took = proc.terminate(sig)
    finally:
        proc.close()
    assert code == 0 and took < 10, (code, took, proc.log_text()[-2000:])
    events = [e.get("event") for e in proc.events if e.get("event")]
    assert "service.stopping" in events and events[-2:] == ["lease.released", "service.stopped"]
    engine = connect(load_config(path).service.database_url)
    try:
        with engine.connect() as conn:
            runs = conn.execute(select(schema.job_runs.c.job, schema.job_runs.c.outcome)
                                .where(schema.job_runs.c.job == "cycle")).all()
            lease = conn.execute(select(schema.scheduler_lease)).one()
        # the cycle in hand finished (recorded ok), the other water body was left for the next run
        assert runs and all(outcome == "ok" for _, outcome in runs) and len(runs) <= 2
        assert lease.expires_utc <= lease.heartbeat_utc  # released: a waiting scheduler takes over at once
        assert consistency_problems(engine, load_config(path)) == []
    finally:
        engine.dispose()


@pytest.mark.postgres
def test_two_schedulers_on_postgresql_one_acts_and_the_other_takes_over(tmp_path, receivers, pg_engine, postgres_url,
                                                                         monkeypatch):
    smtp, smtp_port, hook = receivers
    with pg_engine.connect() as conn:
        schema_name = conn.exec_driver_sql("SELECT current_schema()").scalar()
    monkeypatch.setenv("PGOPTIONS", f"-csearch_path={schema_name}")  # the fixture's schema, for every process
    lease_seconds = 3.0
    folder, path = _setup(tmp_path, smtp_port, hook.url, database=postgres_url, lease_seconds=lease_seconds)
    config = load_config(path)
    clock = ServiceClock(START - dt.timedelta(hours=3), speed=86400 / WALL_S_PER_DAY, anchor=time.time() + 3)
    dropper = Dropper(folder, clock, START.date() - dt.timedelta(days=14), START.date() + dt.timedelta(days=8))
    dropper.drop_due()
    dropper.start()
    a = ServiceProcess(path, clock)
    b = None
    try:
        assert a.wait_for("lease.acquired", 60), a.log_text()[-3000:]
        b = ServiceProcess(path, clock)
        assert b.wait_for("lease.waiting", 60), b.log_text()[-3000:]
        kill_at = START + dt.timedelta(days=random.Random(7).uniform(3.0, 4.5))
        while clock() < kill_at:
            time.sleep(0.05)
        assert b.wait_for("lease.acquired", 0) is None  # B only waited while A acted
        killed = time.monotonic()
        a.kill()
        assert b.wait_for("lease.acquired", lease_seconds + 10), b.log_text()[-3000:]
        took_over = time.monotonic() - killed
        while clock() < START + dt.timedelta(days=7):
            time.sleep(0.1)
        dropper.stop()
        rounds = len([e for e in b.events if e.get("event") == "job.finished" and e["job"] == "ingest"])
        deadline = time.monotonic() + 60
        while len([e for e in b.events if e.get("event") == "job.finished" and e["job"] == "ingest"]) <= rounds:
            assert time.monotonic() < deadline
            time.sleep(0.2)
        code, _ = b.terminate(signal.SIGTERM)
        assert code == 0
    finally:
        dropper.stop()
        a.close()
        if b is not None:
            b.close()
    # within the lease time: B polls every lease_seconds / 3, and the database dropped A's lock when A died
    assert took_over < lease_seconds + 2, took_over
    _drain(path, clock)
    a_owner, b_owner = (p.wait_for("service.started", 0)["holder"] for p in (a, b))
    jr = schema.job_runs
    with pg_engine.connect() as conn:
        by_owner = {o: conn.execute(select(jr.c.started_utc).where(jr.c.owner == o)).scalars().all()
                    for o in (a_owner, b_owner)}
        lease = conn.execute(select(schema.scheduler_lease)).one()
    assert by_owner[a_owner] and by_owner[b_owner]
    assert max(by_owner[a_owner]) <= min(by_owner[b_owner]), "the two schedulers never acted at the same time"
    assert (lease.holder, lease.term) == (b_owner, 2)
    twice = {k: v for k, v in cycle_runs_by_owner(pg_engine).items() if sum(o == "ok" for _, o in v) > 1}
    assert twice == {}, "no cycle ran twice"
    cycles = cycle_runs_by_owner(pg_engine)
    assert {o for v in cycles.values() for o, _ in v} == {a_owner, b_owner}
    assert consistency_problems(pg_engine, config) == []
    delivered = _check_deliveries(pg_engine, config, smtp, hook)  # no email twice unless its attempt was cut off
    assert delivered["messages"] > 0
