"""The outbox: every email Bloomline sends is first a row here.

An alert change becomes one ``outbox`` row per subscriber (the pair
``(event_id, recipient)`` is unique, so an event can never be queued twice
for one address); a web sign-up's confirmation is one row. Rows are queued
in the caller's transaction and handed over later by
:func:`monitor.alerting.notify.send_due`. Nothing is ever deleted: a row
that failed too often is kept as ``dead``, with its last error, until an
operator requeues it (:func:`requeue_dead`).
"""

from __future__ import annotations

import datetime as dt

from sqlalchemy import func, select, update
from sqlalchemy.engine import Connection, Engine

from monitor.alerting.messages import render_alert, render_confirmation
from monitor.alerting.subscriptions import Subscriber, subscribers_for
from monitor.store.schema import outbox


def enqueue(conn: Connection, *, recipient: str, subject: str, body: str, now: dt.datetime,
            event_id: int | None = None) -> int:
    """Queue one message for sending now; return the outbox id."""
    result = conn.execute(outbox.insert().values(
        event_id=event_id, recipient=recipient, subject=subject, body=body, created_at=now,
        status="pending", attempts=0, next_attempt_at=now, last_error=None, sent_at=None))
    return int(result.inserted_primary_key[0])


def enqueue_event(conn: Connection, water_body, event: dict, *, base_url: str, now: dt.datetime) -> int:
    """Queue the email for one alert event to every subscriber it concerns; return the count.

    A raise goes to subscribers whose ``min_level`` is at most the new
    level; a lowering or clearing to those who were told of the old level
    (``min_level`` at most the old level).
    """
    level = max(event["from_level"], event["to_level"])
    n = 0
    for sub in subscribers_for(conn, water_body.id, level):
        subject, body = render_alert(water_body, event, base_url=base_url, subscriber=sub)
        enqueue(conn, recipient=sub.email, subject=subject, body=body, now=now, event_id=event["id"])
        n += 1
    return n


def enqueue_confirmation(engine: Engine, water_body, subscriber: Subscriber, *, base_url: str,
                         now: dt.datetime) -> int:
    """Queue the confirmation email of a web sign-up; return the outbox id."""
    subject, body = render_confirmation(water_body, subscriber, base_url=base_url)
    with engine.begin() as conn:
        return enqueue(conn, recipient=subscriber.email, subject=subject, body=body, now=now)


def requeue_dead(engine: Engine, now: dt.datetime) -> int:
    """Give every dead message a fresh set of attempts, due now; return how many."""
    with engine.begin() as conn:
        return conn.execute(update(outbox).where(outbox.c.status == "dead").values(
            status="pending", attempts=0, next_attempt_at=now)).rowcount


def outbox_counts(engine: Engine) -> dict[str, int]:
    """Number of outbox rows per status."""
    with engine.connect() as conn:
        return {r.status: int(r.n) for r in conn.execute(
            select(outbox.c.status, func.count().label("n")).group_by(outbox.c.status))}
