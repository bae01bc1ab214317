"""Webhooks: JSON calls to subscribers' URLs for alert changes and new forecasts, signed with HMAC-SHA256.

Subscriptions are the ``[[webhooks]]`` tables of the config
(:class:`monitor.config.WebhookConfig`). Each call is one outbox row
(:mod:`monitor.alerting.outbox`, channel ``webhook``) queued in the
cycle's transaction and sent, retried and recorded like an email
(:func:`monitor.alerting.notify.send_due` with a
:class:`monitor.alerting.transports.WebhookTransport`).

The request (README "Webhooks"): ``POST`` of the JSON body with

* ``X-Bloomline-Event-Id`` — the idempotency key, also the body's ``id``;
  a repeat carries the same id;
* ``X-Bloomline-Event-Type`` — ``alert.changed`` or ``forecast.issued``;
* ``X-Bloomline-Timestamp`` — Unix time of this attempt [s];
* ``X-Bloomline-Signature`` — ``v1=`` and the hex HMAC-SHA256 (RFC 2104,
  FIPS 180-4) of ``"<timestamp>." + body`` under the webhook's secret;
* ``X-Bloomline-Delivery-Attempt`` — 1 for the first try, then 2, 3 ….

A receiver recomputes the signature over the raw body, compares it in
constant time, refuses a timestamp outside its replay window
(:data:`REPLAY_WINDOW_S`) and ignores an event id it has already processed.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import hmac
import json
import time
from collections.abc import Mapping

from sqlalchemy import select
from sqlalchemy.engine import Connection

from monitor.alerting.caution import CAUTION
from monitor.alerting.frameworks import FRAMEWORKS
from monitor.alerting.levels import level_label
from monitor.alerting.messages import basin_name
from monitor.alerting.outbox import enqueue, enqueue_once, key_part
from monitor.store.schema import alert_status

SIGNATURE_VERSION = "v1"
#: The replay window Bloomline documents for receivers: a timestamp further than this from
#: the receiver's clock is refused [s] (common practice for signed webhooks: five minutes).
REPLAY_WINDOW_S = 300
HEADER_ID = "X-Bloomline-Event-Id"
HEADER_TYPE = "X-Bloomline-Event-Type"
HEADER_TIMESTAMP = "X-Bloomline-Timestamp"
HEADER_SIGNATURE = "X-Bloomline-Signature"
HEADER_ATTEMPT = "X-Bloomline-Delivery-Attempt"
ALERT_CHANGED = "alert.changed"
FORECAST_ISSUED = "forecast.issued"


class WebhookVerificationError(ValueError):
    """A request that fails the documented verification recipe."""


def signature(secret: str, timestamp: int, body: bytes) -> str:
    """``v1=<hex>``: HMAC-SHA256 of ``"<timestamp>." + body`` under ``secret`` (UTF-8)."""
    mac = hmac.new(secret.encode("utf-8"), f"{int(timestamp)}.".encode("ascii") + body, hashlib.sha256)
    return f"{SIGNATURE_VERSION}={mac.hexdigest()}"


def signed_headers(secret: str, message_key: str, event_type: str, body: bytes, *, attempt: int,
                   timestamp: int | None = None) -> dict[str, str]:
    """The headers of one attempt; ``timestamp`` [Unix s] defaults to now."""
    ts = int(time.time()) if timestamp is None else int(timestamp)
    return {"Content-Type": "application/json; charset=utf-8", HEADER_ID: message_key, HEADER_TYPE: event_type,
            HEADER_TIMESTAMP: str(ts), HEADER_SIGNATURE: signature(secret, ts, body), HEADER_ATTEMPT: str(attempt)}


def verify(secret: str, headers: Mapping[str, str], body: bytes, *, now: float | None = None,
           window_s: float = REPLAY_WINDOW_S) -> str:
    """Check one received request by the documented recipe; return its event id or raise.

    For receivers written in Python. ``headers`` is looked up case-insensitively;
    ``now`` [Unix s] defaults to the clock. Deduplicating event ids is the
    receiver's part (a repeat is valid but already processed).
    """
    lower = {k.lower(): v for k, v in headers.items()}
    try:
        ts = int(lower[HEADER_TIMESTAMP.lower()])
        given = lower[HEADER_SIGNATURE.lower()]
        event_id = lower[HEADER_ID.lower()]
    except (KeyError, ValueError):
        raise WebhookVerificationError("missing or malformed Bloomline signature headers") from None
    if abs((time.time() if now is None else now) - ts) > window_s:
        raise WebhookVerificationError("timestamp outside the replay window")
    expected = signature(secret, ts, body)
    if not any(hmac.compare_digest(expected, s.strip()) for s in given.split(",")):
        raise WebhookVerificationError("signature does not match")
    return event_id


def _dumps(payload: dict) -> str:
    return json.dumps(payload, ensure_ascii=False, separators=(",", ":"), sort_keys=False)


def _links(base_url: str, water_body_id: str) -> dict:
    base = base_url.rstrip("/")
    return {"page": f"{base}/water-bodies/{water_body_id}",
            "forecast": f"{base}/api/v1/water-bodies/{water_body_id}/forecast",
            "alert_events": f"{base}/api/v1/water-bodies/{water_body_id}/alert-events"}


def _framework(water_body) -> dict:
    fw = FRAMEWORKS.get(water_body.alerts.framework)
    return {"id": water_body.alerts.framework, "title": fw.title if fw else "custom levels",
            "source": fw.source if fw else "levels set in this water body's configuration"}


def alert_payload(key: str, water_body, event: dict, *, base_url: str, now: dt.datetime) -> dict:
    """The JSON of an ``alert.changed`` call for one alert event (a dict from ``rules.evaluate_run``)."""
    return {
        "id": key, "type": ALERT_CHANGED, "created_utc": now.isoformat(),
        "water_body": {"id": water_body.id, "name": water_body.name},
        "basin": {"id": event["basin_id"], "name": basin_name(water_body, event["basin_id"])},
        "analysis_utc": event["time_utc"].isoformat(),
        "from_level": event["from_level"], "from_level_name": level_label(water_body, event["from_level"]),
        "to_level": event["to_level"], "to_level_name": level_label(water_body, event["to_level"]),
        "probability": event.get("probability"), "observed_ugL": event.get("observed_ugL"),
        "horizon_days": water_body.alerts.horizon_days, "warn_probability": water_body.alerts.warn_probability,
        "framework": _framework(water_body), "links": _links(base_url, water_body.id), "caution": CAUTION,
    }


def enqueue_alert(conn: Connection, config, water_body, event: dict, *, now: dt.datetime) -> int:
    """Queue an ``alert.changed`` call to every webhook of the water body that wants it; return the count.

    As for emails, a raise goes to webhooks whose ``min_level`` is at most
    the new level, a lowering to those told of the old one.
    """
    level = max(event["from_level"], event["to_level"])
    n = 0
    for hook in config.webhooks:
        if not hook.wants(water_body.id, "alert") or hook.min_level > level:
            continue
        key = f"alert-{event['id']}-{key_part(hook.name)}"
        body = _dumps(alert_payload(key, water_body, event, base_url=config.service.base_url, now=now))
        enqueue(conn, recipient=hook.name, subject=ALERT_CHANGED, body=body, now=now, event_id=event["id"],
                channel="webhook", message_key=key)
        n += 1
    return n


def forecast_key(water_body_id: str, analysis: dt.datetime, hook_name: str) -> str:
    """The event id of a ``forecast.issued`` call: one per water body, analysis time and webhook."""
    return f"forecast-{key_part(water_body_id)}-{analysis.astimezone(dt.UTC):%Y%m%dT%H%MZ}-{key_part(hook_name)}"


def enqueue_forecast(conn: Connection, config, water_body, *, run_id: int, analysis: dt.datetime, status: str,
                     maxima: Mapping[str, Mapping[int, float]], now: dt.datetime) -> int:
    """Queue a ``forecast.issued`` call per webhook that wants it (once per analysis time); return the count.

    ``maxima`` maps basin id to {level: probability [0–1] of reaching it
    within the horizon}; the level in force is read from ``alert_status``
    in the caller's transaction.
    """
    hooks = [h for h in config.webhooks if h.wants(water_body.id, "forecast")]
    if not hooks:
        return 0
    levels = {r.basin_id: int(r.level) for r in conn.execute(
        select(alert_status.c.basin_id, alert_status.c.level).where(alert_status.c.water_body_id == water_body.id))}
    basins = [{"id": b.id, "name": b.name, "level": levels.get(b.id, 0),
               "level_name": level_label(water_body, levels.get(b.id, 0)),
               "probability_within_horizon": {str(n): p for n, p in sorted(maxima.get(b.id, {}).items())}}
              for b in water_body.basins]
    n = 0
    for hook in hooks:
        key = forecast_key(water_body.id, analysis, hook.name)
        payload = {"id": key, "type": FORECAST_ISSUED, "created_utc": now.isoformat(),
                   "water_body": {"id": water_body.id, "name": water_body.name},
                   "analysis_utc": analysis.isoformat(), "run_id": run_id, "status": status,
                   "horizon_days": water_body.alerts.horizon_days, "basins": basins,
                   "framework": _framework(water_body), "links": _links(config.service.base_url, water_body.id),
                   "caution": CAUTION}
        if enqueue_once(conn, message_key=key, recipient=hook.name, subject=FORECAST_ISSUED, body=_dumps(payload),
                        now=now, channel="webhook") is not None:
            n += 1
    return n
