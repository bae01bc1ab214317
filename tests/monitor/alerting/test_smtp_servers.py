"""SMTP against real servers on loopback: STARTTLS with certificate checks and login (aiosmtpd), and a
server that accepts the connection but never answers DATA."""

from __future__ import annotations

import datetime as dt
import ssl
import time

import pytest
from sqlalchemy import insert, select

from monitor.alerting.notify import send_due
from monitor.alerting.outbox import attempts_of, enqueue
from monitor.alerting.transports import SmtpTransport
from monitor.config import SmtpConfig
from monitor.store.db import open_store
from monitor.store.schema import outbox, water_bodies
from tests.monitor.receivers import HungSmtpServer, SmtpRecorder, start_smtp, tls_files

T0 = dt.datetime(2026, 8, 1, 7, 0, tzinfo=dt.UTC)


@pytest.fixture
def engine(tmp_path):
    engine = open_store(f"sqlite:///{tmp_path / 'smtp.sqlite'}")
    with engine.begin() as conn:
        conn.execute(insert(water_bodies).values(id="hollin", name="Hollin Mere", use="drinking-water",
                                                 timezone="UTC", framework="who-1999-drinking-water"))
    yield engine
    engine.dispose()


def queue(engine, n=1):
    with engine.begin() as conn:
        for i in range(n):
            enqueue(conn, recipient=f"r{i}@hollin.example", subject=f"subject {i}", body=f"body {i}\n", now=T0)


def statuses(engine):
    with engine.connect() as conn:
        return [r.status for r in conn.execute(select(outbox.c.status).order_by(outbox.c.id))]


@pytest.fixture
def tls_server(tmp_path):
    cert, key = tls_files(tmp_path)
    server_context = ssl.create_default_context(ssl.Purpose.CLIENT_AUTH)
    server_context.load_cert_chain(cert, key)
    started = []

    def start(login=("bloomline", "correct horse")):
        handler = SmtpRecorder()
        controller = start_smtp(handler, tls_context=server_context, login=login)
        started.append(controller)
        return handler, controller.port, cert

    yield start
    for c in started:
        c.stop()


def test_starttls_and_login_deliver_and_the_server_sees_the_login(engine, tls_server):
    handler, port, cert = tls_server()
    smtp = SmtpConfig(host="localhost", port=port, sender="alerts@bloomline.test", username="bloomline",
                      password="correct horse", starttls=True, timeout_s=5.0, ca_file=cert)
    queue(engine, 2)
    assert send_due(engine, SmtpTransport(smtp), T0).sent == 2
    assert sorted(m["To"] for m in handler.messages) == ["r0@hollin.example", "r1@hollin.example"]
    assert handler.logins == ["bloomline", "bloomline"]


def test_a_wrong_password_is_a_failure_retried_later_not_a_loss(engine, tls_server):
    handler, port, cert = tls_server()
    smtp = SmtpConfig(host="localhost", port=port, sender="alerts@bloomline.test", username="bloomline",
                      password="wrong", starttls=True, timeout_s=5.0, ca_file=cert)
    queue(engine)
    summary = send_due(engine, SmtpTransport(smtp), T0)
    assert (summary.sent, summary.failed) == (0, 1) and handler.messages == []
    assert statuses(engine) == ["pending"]
    assert "535" in summary.last_error  # RFC 4954 §6: authentication credentials invalid


def test_a_certificate_the_client_does_not_trust_is_refused(engine, tls_server):
    handler, port, _cert = tls_server()
    smtp = SmtpConfig(host="localhost", port=port, sender="alerts@bloomline.test", username="bloomline",
                      password="correct horse", starttls=True, timeout_s=5.0)  # system CAs only
    queue(engine)
    summary = send_due(engine, SmtpTransport(smtp), T0)
    assert summary.failed == 1 and handler.messages == []
    assert "CERTIFICATE_VERIFY_FAILED" in summary.last_error


def test_without_starttls_a_server_that_requires_it_refuses_the_message(engine, tls_server):
    handler, port, cert = tls_server(login=None)
    smtp = SmtpConfig(host="localhost", port=port, sender="alerts@bloomline.test", starttls=False, timeout_s=5.0,
                      ca_file=cert)
    queue(engine)
    assert send_due(engine, SmtpTransport(smtp), T0).failed == 1 and handler.messages == []


def test_a_server_that_never_answers_data_costs_one_timeout_per_round(engine):
    server = HungSmtpServer()
    try:
        smtp = SmtpConfig(host="127.0.0.1", port=server.port, sender="alerts@bloomline.test", timeout_s=1.0)
        queue(engine, 5)
        started = time.monotonic()
        summary = send_due(engine, SmtpTransport(smtp), T0)
        took = time.monotonic() - started
    finally:
        server.close()
    # one message waits out the timeout; the other four are left for the next round untouched
    assert (summary.sent, summary.failed, summary.deferred) == (0, 1, 4)
    assert took < 4.0, f"the round took {took:.1f} s"
    assert server.data_commands == 1
    assert statuses(engine) == ["pending"] * 5
    with engine.connect() as conn:
        first = conn.execute(select(outbox.c.id).order_by(outbox.c.id)).scalars().first()
    (attempt,) = attempts_of(engine, first)
    assert attempt["outcome"] == "failed" and "timed out" in attempt["detail"]
