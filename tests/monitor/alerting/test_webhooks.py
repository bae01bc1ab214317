"""Webhooks: signed JSON calls checked by an independent receiver (stdlib ``hmac``), replays and
tampering refused by the documented recipe, retries with the same event id, every attempt recorded."""

from __future__ import annotations

import datetime as dt
import json
import time
from pathlib import Path

import pytest
import requests
from sqlalchemy import insert, select

from monitor.alerting.caution import CAUTION
from monitor.alerting.notify import send_due
from monitor.alerting.outbox import attempts_of
from monitor.alerting.rules import evaluate_run
from monitor.alerting.subscriptions import sync_from_config
from monitor.alerting.transports import WebhookTransport
from monitor.alerting.webhooks import WebhookVerificationError, verify
from monitor.config import ConfigError, parse_config
from monitor.store.db import open_store
from monitor.store.schema import forecast_runs, forecast_values, outbox, water_bodies
from tests.monitor.receivers import WebhookReceiver, free_port

T0 = dt.datetime(2026, 8, 1, 7, 0, tzinfo=dt.UTC)
SECRET = "utility-shared-secret-0123456789"


def make_config(tmp_path, hooks):
    return parse_config({
        "service": {"database": f"sqlite:///{tmp_path / 'hooks.sqlite'}", "base_url": "https://lakes.example.org"},
        "water_bodies": [{"id": "hollin", "name": "Hollin Mere", "use": "drinking-water", "alerts": {"horizon_days": 2},
                          "basins": [{"id": "arm", "name": "Reed Arm", "volume_m3": 1e6, "mean_depth_m": 4.0,
                                      "area_m2": 2.5e5}]}],
        "subscribers": [{"name": "Gil", "email": "gil@hollin.example", "water_bodies": ["hollin"]}],
        "webhooks": hooks,
    })


@pytest.fixture
def receivers():
    started = []

    def start(**kwargs):
        r = WebhookReceiver(SECRET, **kwargs)
        started.append(r)
        return r

    yield start
    for r in started:
        r.close()


def raise_alert(tmp_path, hooks):
    """A stored run whose level-1 probability fires, evaluated: one alert event queued to everyone."""
    cfg = make_config(tmp_path, hooks)
    engine = open_store(cfg.service.database_url)
    with engine.begin() as conn:
        conn.execute(insert(water_bodies).values(id="hollin", name="Hollin Mere", use="drinking-water",
                                                 timezone="UTC", framework="who-1999-drinking-water"))
    sync_from_config(engine, cfg, T0)
    with engine.begin() as conn:
        run = conn.execute(insert(forecast_runs).values(water_body_id="hollin", analysis_utc=T0, created_at=T0,
                                                        status="ok", message="")).inserted_primary_key[0]
        conn.execute(insert(forecast_values), [
            dict(run_id=run, basin_id="arm", valid_utc=T0 + dt.timedelta(days=k), quantity="cyanobacteria_chlorophyll",
                 statistic="p_level_1", value=p) for k, p in enumerate([0.3, 0.6, 0.9])])
    (event,) = evaluate_run(engine, cfg, "hollin", run, {"arm": 0.4}, now=T0)
    return cfg, engine, event


def hook(name, url, **extra):
    return {"name": name, "url": url, "secret": SECRET, **extra}


def test_an_alert_change_reaches_the_webhook_signed_and_with_the_caution(tmp_path, receivers):
    receiver = receivers()
    cfg, engine, event = raise_alert(tmp_path, [hook("utility", receiver.url)])
    assert (event["emails"], event["webhooks"]) == (1, 1)
    assert send_due(engine, WebhookTransport(cfg.webhooks), T0, channel="webhook").sent == 1
    (request,) = receiver.requests
    assert (request["status"], request["reason"]) == (200, "processed")  # the independent check passed
    payload = json.loads(request["body"])
    assert payload["type"] == "alert.changed" == request["headers"]["X-Bloomline-Event-Type"]
    assert payload["id"] == request["headers"]["X-Bloomline-Event-Id"]
    assert (payload["from_level"], payload["to_level"], payload["basin"]["id"]) == (0, 1, "arm")
    assert payload["probability"] == pytest.approx(0.9) and payload["caution"] == CAUTION
    assert payload["links"]["forecast"] == "https://lakes.example.org/api/v1/water-bodies/hollin/forecast"
    assert request["headers"]["X-Bloomline-Delivery-Attempt"] == "1"
    engine.dispose()


def test_a_tampered_body_and_a_replay_outside_the_window_are_refused(tmp_path, receivers):
    receiver = receivers()
    cfg, engine, _ = raise_alert(tmp_path, [hook("utility", receiver.url)])
    send_due(engine, WebhookTransport(cfg.webhooks), T0, channel="webhook")
    (genuine,) = receiver.requests
    headers, body = genuine["headers"], genuine["body"]
    forward = {k: v for k, v in headers.items() if k.startswith("X-Bloomline") or k == "Content-Type"}
    tampered = body.replace(b'"to_level":1', b'"to_level":0')
    assert tampered != body
    assert requests.post(receiver.url, data=tampered, headers=forward, timeout=5).status_code == 401
    assert receiver.requests[-1]["reason"] == "signature does not match"
    # the same bytes again within the window: genuine, recognised as already processed
    again = requests.post(receiver.url, data=body, headers=forward, timeout=5)
    assert (again.status_code, again.text) == (200, "duplicate")
    # the same bytes replayed after the five-minute window: refused by the timestamp check
    status, reason = receiver.handle(headers, body, now=int(headers["X-Bloomline-Timestamp"]) + 301)
    assert (status, reason) == (401, "timestamp outside the replay window")
    assert len(receiver.processed) == 1
    engine.dispose()


def test_bloomlines_own_verify_agrees_with_the_independent_recipe(tmp_path, receivers):
    receiver = receivers()
    cfg, engine, _ = raise_alert(tmp_path, [hook("utility", receiver.url)])
    send_due(engine, WebhookTransport(cfg.webhooks), T0, channel="webhook")
    (genuine,) = receiver.requests
    headers, body = genuine["headers"], genuine["body"]
    ts = int(headers["X-Bloomline-Timestamp"])
    assert verify(SECRET, headers, body, now=ts + 10) == headers["X-Bloomline-Event-Id"]
    with pytest.raises(WebhookVerificationError, match="signature does not match"):
        verify(SECRET, headers, body + b" ", now=ts)
    with pytest.raises(WebhookVerificationError, match="replay window"):
        verify(SECRET, headers, body, now=ts + 301)
    with pytest.raises(WebhookVerificationError, match="signature does not match"):
        verify("another-secret-of-enough-length", headers, body, now=ts)
    engine.dispose()


def test_a_failing_receiver_gets_retries_with_the_same_event_id_and_every_attempt_is_recorded(tmp_path, receivers):
    receiver = receivers(fail_first=2)
    cfg, engine, _ = raise_alert(tmp_path, [hook("utility", receiver.url)])
    transport, now = WebhookTransport(cfg.webhooks), T0
    results = []
    for _ in range(3):
        results.append(send_due(engine, transport, now, channel="webhook", owner="host:7"))
        with engine.connect() as conn:
            row = conn.execute(select(outbox).where(outbox.c.channel == "webhook")).one()
        now = row.next_attempt_at
    assert [(s.sent, s.failed) for s in results] == [(0, 1), (0, 1), (1, 0)]
    ids = {r["headers"]["X-Bloomline-Event-Id"] for r in receiver.requests}
    assert ids == {row.message_key}
    assert [r["headers"]["X-Bloomline-Delivery-Attempt"] for r in receiver.requests] == ["1", "2", "3"]
    assert [r["status"] for r in receiver.requests] == [500, 500, 200]
    recorded = attempts_of(engine, row.id)
    assert [(a["attempt"], a["outcome"]) for a in recorded] == [(1, "failed"), (2, "failed"), (3, "accepted")]
    assert "HTTP 500" in recorded[0]["detail"] and recorded[2]["detail"] == "HTTP 200"
    engine.dispose()


def test_an_unreachable_webhook_does_not_hold_up_another(tmp_path, receivers):
    receiver = receivers()
    nobody = f"http://127.0.0.1:{free_port()}/hook"
    cfg, engine, _ = raise_alert(tmp_path, [hook("gone", nobody, timeout_s=1.0), hook("utility", receiver.url)])
    started = time.monotonic()
    summary = send_due(engine, WebhookTransport(cfg.webhooks), T0, channel="webhook")
    assert (summary.sent, summary.failed) == (1, 1)
    assert time.monotonic() - started < 5
    assert len(receiver.processed) == 1
    engine.dispose()


def test_webhooks_follow_the_water_bodies_and_levels_they_ask_for(tmp_path, receivers):
    receiver = receivers()
    hooks = [hook("all", receiver.url), hook("level-two", receiver.url, min_level=2),
             hook("forecasts-only", receiver.url, events=["forecast"]),
             hook("elsewhere", receiver.url, water_bodies=["hollin"], events=["alert"])]
    _cfg, engine, event = raise_alert(tmp_path, hooks)
    with engine.connect() as conn:
        names = sorted(conn.execute(select(outbox.c.recipient).where(outbox.c.channel == "webhook")).scalars())
    assert event["webhooks"] == 2 and names == ["all", "elsewhere"]
    engine.dispose()


@pytest.mark.parametrize(("change", "message"), [
    ({"secret": "short"}, "a signing secret of at least 16 characters is required"),
    ({"name": "has space"}, "expected 1–64 letters, digits"),
    ({"url": "ftp://x"}, "expected an http:// or https:// URL"),
    ({"events": ["alert", "gossip"]}, "expected a list of alert, forecast"),
    ({"water_bodies": ["nowhere"]}, "unknown water body 'nowhere'"),
])
def test_a_webhook_config_is_checked_at_load(tmp_path, change, message):
    with pytest.raises(ConfigError, match=message):
        make_config(tmp_path, [{**hook("utility", "https://utility.example.org/hook"), **change}])


def _readme_verify():
    """The ``verify`` function of README.md's "Webhooks" section, exactly as documented."""
    readme = (Path(__file__).resolve().parents[3] / "README.md").read_text(encoding="utf-8")
    section = readme.split("## Webhooks", 1)[1].split("\n## ", 1)[0]
    code = section.split("```python\n", 1)[1].split("```", 1)[0]
    namespace: dict = {}
    exec(compile(code, "README.md", "exec"), namespace)  # the documented recipe itself
    return namespace["verify"]


def test_the_readme_recipe_accepts_a_genuine_request_and_refuses_tampering(tmp_path, receivers):
    receiver = receivers()
    cfg, engine, _ = raise_alert(tmp_path, [hook("utility", receiver.url)])
    send_due(engine, WebhookTransport(cfg.webhooks), T0, channel="webhook")
    (genuine,) = receiver.requests
    verify_doc = _readme_verify()
    assert verify_doc(SECRET.encode(), genuine["headers"], genuine["body"]) is True
    assert verify_doc(SECRET.encode(), genuine["headers"], genuine["body"] + b"\n") is False
    stale = dict(genuine["headers"], **{"X-Bloomline-Timestamp": str(int(time.time()) - 301)})
    assert verify_doc(SECRET.encode(), stale, genuine["body"]) is False
    engine.dispose()
