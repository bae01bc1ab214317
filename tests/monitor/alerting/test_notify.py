"""Sending the outbox with retries through both transports: the mailbox folder and a real local
SMTP server (aiosmtpd)."""

from __future__ import annotations

import datetime as dt
import email
import email.policy
import socket
import threading

import pytest
from aiosmtpd.controller import Controller
from sqlalchemy import insert, select

from monitor.alerting.caution import CAUTION
from monitor.alerting.notify import ATTEMPT_HEADER, IDEMPOTENCY_HEADER, LEASE, build_message, retry_delay, send_due
from monitor.alerting.outbox import attempts_of, enqueue, outbox_counts, requeue, requeue_dead
from monitor.alerting.transports import MailboxTransport, SmtpTransport, transport_from_config
from monitor.config import SmtpConfig, parse_config
from monitor.store.db import open_store
from monitor.store.schema import outbox, water_bodies

UTC = dt.UTC
T0 = dt.datetime(2026, 8, 1, 7, 0, tzinfo=UTC)


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class Recorder:
    """aiosmtpd handler that keeps every message and answers 451 to the first ``fail_first`` ones."""

    def __init__(self, fail_first: int = 0):
        self.fail_first = fail_first
        self.seen = 0
        self.messages: list[email.message.EmailMessage] = []
        self.lock = threading.Lock()

    async def handle_DATA(self, server, session, envelope):
        with self.lock:
            self.seen += 1
            if self.seen <= self.fail_first:
                return "451 4.3.0 Try again later"  # RFC 5321 §4.2.3: transient failure
            self.messages.append(email.message_from_bytes(envelope.content, policy=email.policy.default))
        return "250 OK"


@pytest.fixture
def smtp_server():
    servers = []

    def start(fail_first=0):
        handler = Recorder(fail_first)
        controller = Controller(handler, hostname="127.0.0.1", port=free_port())
        controller.start()
        servers.append(controller)
        return handler, SmtpConfig(host="127.0.0.1", port=controller.port, sender="alerts@bloomline.test",
                                   timeout_s=5.0)

    yield start
    for c in servers:
        c.stop()


def make_config(tmp_path, mailbox=True):
    service = {"database": f"sqlite:///{tmp_path / 'notify.sqlite'}", "base_url": "http://bloomline.test"}
    if mailbox:
        service["mailbox_dir"] = str(tmp_path / "mailbox")
    return parse_config({
        "service": service,
        "smtp": {"host": "127.0.0.1", "port": 2525, "sender": "alerts@bloomline.test"},
        "water_bodies": [{"id": "hollin", "name": "Hollin Mere", "use": "drinking-water",
                          "basins": [{"id": "arm", "name": "Reed Arm", "volume_m3": 1e6, "mean_depth_m": 4.0,
                                      "area_m2": 2.5e5}]}],
    })


@pytest.fixture
def engine(tmp_path):
    cfg = make_config(tmp_path)
    engine = open_store(cfg.service.database_url)
    with engine.begin() as conn:
        conn.execute(insert(water_bodies).values(id="hollin", name="Hollin Mere", use="drinking-water",
                                                 timezone="UTC", framework="who-1999-drinking-water"))
    yield engine
    engine.dispose()


def queue(engine, n=1, now=T0):
    with engine.begin() as conn:
        return [enqueue(conn, recipient=f"r{i}@hollin.example", subject=f"subject {i}", body=f"body {i}\n",
                        now=now) for i in range(n)]


def rows(engine):
    with engine.connect() as conn:
        return conn.execute(select(outbox).order_by(outbox.c.id)).all()


class Failing:
    sender = "alerts@bloomline.test"

    def __init__(self):
        self.calls = 0

    def send(self, message):
        self.calls += 1
        raise ConnectionRefusedError(111, "Connection refused")


# ---------------------------------------------------------------- messages


def test_message_id_is_stable_for_an_outbox_row(engine):
    queue(engine)
    row = rows(engine)[0]
    a = build_message(row, "alerts@bloomline.test", T0)
    b = build_message(row, "alerts@bloomline.test", T0 + dt.timedelta(hours=3))
    assert a["Message-ID"] == b["Message-ID"]
    assert a["Auto-Submitted"] == "auto-generated"  # RFC 3834 §5


# ---------------------------------------------------------------- mailbox transport


def test_mailbox_transport_writes_one_eml_per_message(engine, tmp_path):
    queue(engine, 3)
    transport = transport_from_config(make_config(tmp_path))
    assert isinstance(transport, MailboxTransport)
    assert send_due(engine, transport, T0).sent == 3
    files = sorted((tmp_path / "mailbox").glob("*.eml"))
    assert len(files) == 3
    parsed = [email.message_from_bytes(f.read_bytes(), policy=email.policy.default) for f in files]
    assert sorted(m["To"] for m in parsed) == ["r0@hollin.example", "r1@hollin.example", "r2@hollin.example"]
    assert {r.status for r in rows(engine)} == {"sent"}
    assert send_due(engine, transport, T0 + dt.timedelta(hours=1)).sent == 0  # nothing sent twice


def test_without_mailbox_the_transport_is_smtp(tmp_path):
    assert isinstance(transport_from_config(make_config(tmp_path, mailbox=False)), SmtpTransport)


# ---------------------------------------------------------------- retries


def test_retry_delay_doubles_from_one_minute_up_to_the_cap():
    assert [retry_delay(n).total_seconds() for n in (1, 2, 3, 4)] == [60, 120, 240, 480]
    assert retry_delay(30).total_seconds() == 6 * 3600


def test_failures_back_off_exponentially_and_end_dead_but_kept(engine):
    queue(engine)
    transport, now, tries = Failing(), T0, []
    for _ in range(50):
        summary = send_due(engine, transport, now, max_attempts=5)
        if summary.failed or summary.dead:
            tries.append(now)
        row = rows(engine)[0]
        if row.status == "dead":
            break
        now = row.next_attempt_at
    gaps = [(b - a).total_seconds() for a, b in zip(tries, tries[1:])]
    assert gaps == [60, 120, 240, 480]
    row = rows(engine)[0]
    assert (row.status, row.attempts, transport.calls) == ("dead", 5, 5)
    assert "ConnectionRefusedError" in row.last_error
    assert outbox_counts(engine) == {"dead": 1}
    assert requeue_dead(engine, now) == 1 and rows(engine)[0].status == "pending"


def test_a_message_not_yet_due_is_not_tried(engine):
    queue(engine)
    transport = Failing()
    send_due(engine, transport, T0)
    send_due(engine, transport, T0 + dt.timedelta(seconds=59))
    assert transport.calls == 1


# ---------------------------------------------------------------- a real SMTP server


def test_smtp_transport_delivers_to_a_local_server(engine, smtp_server):
    handler, smtp = smtp_server()
    queue(engine, 2)
    assert send_due(engine, SmtpTransport(smtp), T0).sent == 2
    assert sorted(m["To"] for m in handler.messages) == ["r0@hollin.example", "r1@hollin.example"]
    assert handler.messages[0]["From"] == "alerts@bloomline.test"
    assert handler.messages[0].get_content().startswith("body ")


def test_smtp_transient_refusal_is_retried_and_then_delivered_once(engine, smtp_server):
    handler, smtp = smtp_server(fail_first=2)
    queue(engine)
    transport, now = SmtpTransport(smtp), T0
    results = []
    for _ in range(3):
        results.append(send_due(engine, transport, now))
        now = rows(engine)[0].next_attempt_at
    assert [(s.sent, s.failed) for s in results] == [(0, 1), (0, 1), (1, 0)]
    assert len(handler.messages) == 1
    row = rows(engine)[0]
    assert (row.status, row.attempts, row.last_error) == ("sent", 3, None)


def test_smtp_server_down_then_up_loses_nothing(engine, smtp_server):
    port = free_port()  # nobody listens here yet
    queue(engine, 2)
    down = SmtpTransport(SmtpConfig(host="127.0.0.1", port=port, sender="alerts@bloomline.test", timeout_s=2.0))
    summary = send_due(engine, down, T0)
    # the first message finds the server down; the second is not tried against it this round
    assert (summary.failed, summary.deferred) == (1, 1)
    handler, smtp = smtp_server()
    assert send_due(engine, SmtpTransport(smtp), T0 + dt.timedelta(minutes=1)).sent == 2
    assert len(handler.messages) == 2 and outbox_counts(engine) == {"sent": 2}


def test_a_second_sender_running_at_the_same_time_skips_a_claimed_message(engine, tmp_path):
    queue(engine)
    inner = []

    class Reentrant:
        sender = "alerts@bloomline.test"

        def send(self, message):
            # while this message is being handed over, another sender loop runs
            inner.append(send_due(engine, MailboxTransport(tmp_path / "other"), T0))

    assert send_due(engine, Reentrant(), T0).sent == 1
    assert inner[0].sent == 0 and not (tmp_path / "other").exists()


def test_a_crash_while_sending_leaves_the_message_pending_for_after_the_lease(engine):
    queue(engine)

    class ProcessDied(BaseException):
        """Stands for the process being killed mid-send (not an ordinary transport error)."""

    class Crash:
        sender = "alerts@bloomline.test"

        def send(self, message):
            raise ProcessDied("killed while sending")

    with pytest.raises(ProcessDied, match="killed while sending"):
        send_due(engine, Crash(), T0)
    row = rows(engine)[0]
    assert (row.status, row.attempts, row.next_attempt_at) == ("pending", 1, T0 + LEASE)
    assert [(a["attempt"], a["outcome"]) for a in attempts_of(engine, row.id)] == [(1, "sending")]


def test_a_repeat_after_a_crash_carries_the_same_key_and_a_higher_attempt_number(engine, tmp_path):
    queue(engine)

    class ProcessDied(BaseException):
        """Stands for the process being killed after the server accepted the message."""

    class AcceptedThenKilled:
        sender = "alerts@bloomline.test"

        def __init__(self):
            self.seen = []

        def send(self, message):
            self.seen.append(message)
            raise ProcessDied("killed before the sent mark was committed")

    first = AcceptedThenKilled()
    with pytest.raises(ProcessDied, match="killed before"):
        send_due(engine, first, T0)
    mailbox = MailboxTransport(tmp_path / "mb", sender="alerts@bloomline.test")
    assert send_due(engine, mailbox, T0 + LEASE - dt.timedelta(seconds=1)).sent == 0
    assert send_due(engine, mailbox, T0 + LEASE).sent == 1
    (again,) = [email.message_from_bytes(f.read_bytes(), policy=email.policy.default)
                for f in (tmp_path / "mb").glob("*.eml")]
    (before,) = first.seen
    assert again["Message-ID"] == before["Message-ID"]
    assert again[IDEMPOTENCY_HEADER] == before[IDEMPOTENCY_HEADER] == rows(engine)[0].message_key
    assert (before[ATTEMPT_HEADER], again[ATTEMPT_HEADER]) == ("1", "2")
    assert [(a["attempt"], a["outcome"]) for a in attempts_of(engine, rows(engine)[0].id)] == [
        (1, "sending"), (2, "accepted")]


def test_every_attempt_is_recorded_with_its_outcome(engine):
    queue(engine)
    transport, now = Failing(), T0
    for _ in range(3):
        send_due(engine, transport, now, owner="host:1")
        now = rows(engine)[0].next_attempt_at
    recorded = attempts_of(engine, rows(engine)[0].id)
    assert [(a["attempt"], a["outcome"], a["owner"]) for a in recorded] == [(n, "failed", "host:1") for n in (1, 2, 3)]
    assert all("ConnectionRefusedError" in a["detail"] and a["ended_utc"] is not None for a in recorded)


def test_requeued_message_keeps_its_key_and_numbers_attempts_on(engine):
    queue(engine)
    transport, now = Failing(), T0
    for _ in range(2):
        send_due(engine, transport, now, max_attempts=2)
        now = rows(engine)[0].next_attempt_at
    assert rows(engine)[0].status == "dead"
    key = rows(engine)[0].message_key
    assert requeue(engine, now, ids=[rows(engine)[0].id]) == 1
    send_due(engine, transport, now, max_attempts=2)
    assert rows(engine)[0].message_key == key
    assert [a["attempt"] for a in attempts_of(engine, rows(engine)[0].id)] == [1, 2, 3]


def test_alert_change_reaches_the_subscriber_through_smtp(engine, tmp_path, smtp_server):
    from monitor.alerting.rules import evaluate_run
    from monitor.alerting.subscriptions import sync_from_config
    from monitor.store.schema import forecast_runs, forecast_values

    cfg = parse_config({
        "service": {"database": f"sqlite:///{tmp_path / 'notify.sqlite'}", "base_url": "http://bloomline.test"},
        "water_bodies": [{"id": "hollin", "name": "Hollin Mere", "use": "drinking-water",
                          "alerts": {"horizon_days": 2},
                          "basins": [{"id": "arm", "name": "Reed Arm", "volume_m3": 1e6, "mean_depth_m": 4.0,
                                      "area_m2": 2.5e5}]}],
        "subscribers": [{"name": "Gil", "email": "gil@hollin.example", "water_bodies": ["hollin"]}],
    })
    sync_from_config(engine, cfg, T0)
    with engine.begin() as conn:
        run = conn.execute(insert(forecast_runs).values(water_body_id="hollin", analysis_utc=T0, created_at=T0,
                                                        status="ok", message="")).inserted_primary_key[0]
        conn.execute(insert(forecast_values), [
            dict(run_id=run, basin_id="arm", valid_utc=T0 + dt.timedelta(days=k), quantity="cyanobacteria_chlorophyll",
                 statistic="p_level_1", value=p) for k, p in enumerate([0.3, 0.6, 0.9])])
    (event,) = evaluate_run(engine, cfg, "hollin", run, {"arm": 0.4}, now=T0)
    handler, smtp = smtp_server()
    assert send_due(engine, SmtpTransport(smtp), T0).sent == 1
    (msg,) = handler.messages
    assert msg["To"] == "gil@hollin.example"
    assert msg["Subject"] == "Bloomline alert: Reed Arm, Hollin Mere raised to Alert Level 1 (1 µg/L)"
    assert not msg.is_multipart() or msg.get_content_type() == "multipart/alternative"
    body = msg.get_body(preferencelist=("plain",)).get_content()
    assert "90 %" in body and CAUTION in body and "/unsubscribe/" in body
    html = msg.get_body(preferencelist=("html",)).get_content()
    assert "90 %" in html and "/unsubscribe/" in html
    # RFC 2369 §3.2: the URL in angle brackets; RFC 8058 §3.1: the one-click POST body
    (sub_row,) = [r for r in rows(engine)]
    token = sub_row.headers["List-Unsubscribe"]
    assert msg["List-Unsubscribe"] == token and token.startswith("<http://bloomline.test/unsubscribe/")
    assert msg["List-Unsubscribe-Post"] == "List-Unsubscribe=One-Click"
    assert msg["Message-ID"] == f"<{sub_row.message_key}@bloomline.test>"
