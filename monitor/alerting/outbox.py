"""The outbox: every email and webhook call Bloomline makes is first a row here.

An alert change becomes one ``outbox`` row per subscriber and per webhook
(the pair ``(event_id, recipient)`` is unique, so an event can never be
queued twice for one receiver); a new forecast one row per webhook that
wants it; a web sign-up's confirmation one row. Rows are queued in the
caller's transaction (for a cycle: the same transaction as its forecast run
and alert events) and handed over later by
:func:`monitor.alerting.notify.send_due`.

Every row has a ``message_key``, its idempotency key: the email's
Message-ID and ``X-Bloomline-Idempotency-Key`` header, the webhook's event
id. A repeat after a crash carries the same key, so a receiver can tell it
from a new message. Nothing is ever deleted: a row that failed too often is
kept as ``dead``, with its last error, until an operator requeues it
(:func:`requeue`, ``bloomline outbox requeue``).
"""

from __future__ import annotations

import datetime as dt
import hashlib
import re
import secrets

from sqlalchemy import and_, func, select, update
from sqlalchemy.engine import Connection, Engine

from monitor.alerting.messages import EmailContent, render_alert, render_confirmation
from monitor.alerting.subscriptions import Subscriber, subscribers_for
from monitor.store.schema import delivery_attempts, outbox
from monitor.store.txn import Bind, reading

#: RFC 8058 §3.1: the POST body a mail client sends to the List-Unsubscribe URL.
ONE_CLICK = "List-Unsubscribe=One-Click"


def key_part(text: str) -> str:
    """``text`` as part of an idempotency key (and so of a Message-ID, RFC 5322 dot-atom): [A-Za-z0-9._-]."""
    return re.sub(r"[^A-Za-z0-9._-]+", "_", text)


def address_digest(address: str) -> str:
    """A short stable digest of an email address, so keys and Message-IDs do not spell it out."""
    return hashlib.sha256(address.strip().lower().encode()).hexdigest()[:12]


def email_headers(content: EmailContent) -> dict[str, str] | None:
    """``List-Unsubscribe`` (RFC 2369 §3.2) and ``List-Unsubscribe-Post`` (RFC 8058 §3.1) of an alert email."""
    if content.unsubscribe_url is None:
        return None
    return {"List-Unsubscribe": f"<{content.unsubscribe_url}>", "List-Unsubscribe-Post": ONE_CLICK}


def enqueue(conn: Connection, *, recipient: str, subject: str, body: str, now: dt.datetime,
            event_id: int | None = None, channel: str = "email", message_key: str | None = None,
            body_html: str | None = None, headers: dict | None = None) -> int:
    """Queue one message for sending now; return the outbox id.

    ``message_key`` is the idempotency key (a random one when not given);
    ``body_html`` the HTML alternative of an email; ``headers`` extra email
    headers.
    """
    if channel not in ("email", "webhook"):
        raise ValueError(f"channel must be 'email' or 'webhook', got {channel!r}")
    result = conn.execute(outbox.insert().values(
        event_id=event_id, recipient=recipient, subject=subject, body=body, created_at=now,
        status="pending", attempts=0, next_attempt_at=now, last_error=None, sent_at=None, channel=channel,
        message_key=message_key or f"msg-{secrets.token_hex(12)}", body_html=body_html, headers=headers))
    return int(result.inserted_primary_key[0])


def enqueue_once(conn: Connection, *, message_key: str, **values) -> int | None:
    """:func:`enqueue` unless a row with this key exists already; the new id, or None."""
    if conn.execute(select(outbox.c.id).where(outbox.c.message_key == message_key)).first() is not None:
        return None
    return enqueue(conn, message_key=message_key, **values)


def enqueue_event(conn: Connection, water_body, event: dict, *, base_url: str, now: dt.datetime) -> int:
    """Queue the email for one alert event to every subscriber it concerns; return the count.

    A raise goes to subscribers whose ``min_level`` is at most the new
    level; a lowering or clearing to those who were told of the old level
    (``min_level`` at most the old level).
    """
    level = max(event["from_level"], event["to_level"])
    n = 0
    for sub in subscribers_for(conn, water_body.id, level):
        content = render_alert(water_body, event, base_url=base_url, subscriber=sub)
        enqueue(conn, recipient=sub.email, subject=content.subject, body=content.text, now=now,
                event_id=event["id"], message_key=f"alert-{event['id']}-{address_digest(sub.email)}",
                body_html=content.html, headers=email_headers(content))
        n += 1
    return n


def enqueue_confirmation(engine: Engine, water_body, subscriber: Subscriber, *, base_url: str,
                         now: dt.datetime) -> int:
    """Queue the confirmation email of a web sign-up; return the outbox id."""
    content = render_confirmation(water_body, subscriber, base_url=base_url)
    with engine.begin() as conn:
        return enqueue(conn, recipient=subscriber.email, subject=content.subject, body=content.text, now=now,
                       message_key=f"confirm-{secrets.token_hex(12)}", body_html=content.html)


def requeue(engine: Engine, now: dt.datetime, ids: list[int] | None = None) -> int:
    """Give dead messages (all, or those with these ids) a fresh set of attempts, due now; return how many.

    The attempt count starts again from zero, but each message keeps its
    idempotency key and its record of earlier attempts.
    """
    where = outbox.c.status == "dead"
    if ids is not None:
        where = and_(where, outbox.c.id.in_(ids))
    with engine.begin() as conn:
        return conn.execute(update(outbox).where(where).values(
            status="pending", attempts=0, next_attempt_at=now)).rowcount


def requeue_dead(engine: Engine, now: dt.datetime) -> int:
    """Give every dead message a fresh set of attempts, due now; return how many."""
    return requeue(engine, now)


def outbox_counts(bind: Bind) -> dict[str, int]:
    """Number of outbox rows per status."""
    with reading(bind) as conn:
        return {r.status: int(r.n) for r in conn.execute(
            select(outbox.c.status, func.count().label("n")).group_by(outbox.c.status))}


def outbox_status(bind: Bind, now: dt.datetime, *, dead_limit: int = 50) -> dict:
    """Counts per channel and status, the oldest pending message's age [s], and the dead rows."""
    with reading(bind) as conn:
        counts: dict[str, dict[str, int]] = {}
        for channel, status, n in conn.execute(select(outbox.c.channel, outbox.c.status, func.count())
                                               .group_by(outbox.c.channel, outbox.c.status)):
            counts.setdefault(channel, {})[status] = int(n)
        oldest = conn.execute(select(func.min(outbox.c.created_at)).where(outbox.c.status == "pending")).scalar()
        dead = conn.execute(select(outbox.c.id, outbox.c.channel, outbox.c.recipient, outbox.c.subject,
                                   outbox.c.attempts, outbox.c.last_error, outbox.c.message_key)
                            .where(outbox.c.status == "dead").order_by(outbox.c.id).limit(dead_limit)).all()
    return {"counts": counts,
            "oldest_pending_age_s": (now - oldest).total_seconds() if oldest is not None else None,
            "dead": [dict(r._mapping) for r in dead]}


def attempts_of(bind: Bind, outbox_id: int) -> list[dict]:
    """The recorded delivery attempts of one outbox row, oldest first."""
    with reading(bind) as conn:
        rows = conn.execute(select(delivery_attempts).where(delivery_attempts.c.outbox_id == outbox_id)
                            .order_by(delivery_attempts.c.attempt)).all()
    return [dict(r._mapping) for r in rows]
