"""Sending the outbox: due rows handed to a transport, every attempt recorded, failures retried with back-off.

:func:`send_due` hands every due ``pending`` row of one channel of the
outbox (:mod:`monitor.alerting.outbox`; ``email`` or ``webhook``) to an
injected transport (:mod:`monitor.alerting.transports`):

1. **claim**: one transaction moves the row's ``next_attempt_at`` a
   :data:`LEASE` ahead, counts the attempt and records it in
   ``delivery_attempts`` as ``sending``;
2. **hand over** to the transport;
3. **record** the answer at once, in its own transaction: ``sent`` as soon
   as the server has accepted the message (for SMTP: its reply to DATA,
   before the connection is closed), or the error with the next try
   ``retry_delay(attempts)`` later; the ``max_attempts``-th failure marks
   the row ``dead`` (kept).

Delivery is at-least-once. A process that dies between the server's
acceptance and step 3 leaves the attempt ``sending``; the row is tried
again when its lease ends, with the same idempotency key (Message-ID and
``X-Bloomline-Idempotency-Key``, or the webhook's event id) and a higher
``X-Bloomline-Delivery-Attempt``, so the receiver can recognise the repeat.
A server that cannot be reached fails its message and the rest of the
round for that server waits for the next round.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import smtplib
import threading
from collections.abc import Callable
from dataclasses import dataclass
from email.message import EmailMessage
from email.policy import default as _default_policy
from email.utils import format_datetime

import requests
from sqlalchemy import and_, func, insert, select, update
from sqlalchemy.engine import Connection, Engine

# transport_from_config is named here too: monitor.app.service builds its transport as notify.transport_from_config.
from monitor.alerting.transports import Transport, transport_from_config  # noqa: F401
from monitor.store.schema import delivery_attempts, outbox

#: Defaults of the retry policy: first retry after 1 min, doubling, at most 6 h apart,
#: dead after 12 failed attempts (about 20 h of trying).
BASE_DELAY_S = 60.0
MAX_DELAY_S = 6 * 3600.0
MAX_ATTEMPTS = 12
HEADER_POLICY = _default_policy.clone(max_line_length=998)
#: How long a sender holds a message it is handing over before another sender may try it.
LEASE = dt.timedelta(minutes=5)
IDEMPOTENCY_HEADER = "X-Bloomline-Idempotency-Key"
ATTEMPT_HEADER = "X-Bloomline-Delivery-Attempt"


@dataclass(frozen=True)
class SendSummary:
    sent: int
    failed: int  # failed this round, will be retried
    dead: int    # failed for the last time this round, kept as "dead"
    deferred: int = 0  # not tried this round: their server was unreachable earlier in the round
    last_error: str | None = None  # the last failure of the round


def retry_delay(attempts: int, base_delay_s: float = BASE_DELAY_S, max_delay_s: float = MAX_DELAY_S) -> dt.timedelta:
    """Back-off before the next try after ``attempts`` failures: base·2^(attempts−1), capped. [s]"""
    return dt.timedelta(seconds=min(base_delay_s * 2.0 ** (attempts - 1), max_delay_s))


def build_message(row, sender: str, now: dt.datetime, *, attempt: int | None = None) -> EmailMessage:
    """The RFC 5322 message for one outbox row; its Message-ID and idempotency key are stable per row.

    Plain text, and the HTML alternative when the row has one
    (multipart/alternative, RFC 2046 §5.1.4); the row's extra headers
    (``List-Unsubscribe`` …); ``attempt`` numbers the delivery attempt.
    """
    # Long header lines instead of folding: Python's folder leaves a doubled space before an
    # encoded word (e.g. "1  µg/L") when a subject with non-ASCII text is folded. RFC 5322 §2.1.1
    # allows lines up to 998 characters; the body stays quoted-printable.
    msg = EmailMessage(policy=HEADER_POLICY)
    msg["From"] = sender
    msg["To"] = row.recipient
    msg["Subject"] = row.subject
    msg["Date"] = format_datetime(now.astimezone(dt.UTC))
    domain = sender.rpartition("@")[2] or "localhost"
    msg["Message-ID"] = f"<{row.message_key}@{domain}>"
    msg[IDEMPOTENCY_HEADER] = row.message_key
    if attempt is not None:
        msg[ATTEMPT_HEADER] = str(attempt)
    msg["Auto-Submitted"] = "auto-generated"  # RFC 3834: no auto-replies, please
    for name, value in (getattr(row, "headers", None) or {}).items():
        msg[name] = value
    msg.set_content(row.body, cte="quoted-printable")
    html = getattr(row, "body_html", None)
    if html:
        msg.add_alternative(html, subtype="html", cte="quoted-printable")
    return msg


def unreachable(exc: BaseException) -> bool:
    """Did the transport fail to reach its server at all (rather than get an answer refusing the message)?"""
    if isinstance(exc, (smtplib.SMTPResponseException, smtplib.SMTPRecipientsRefused, requests.HTTPError)):
        return False
    return isinstance(exc, OSError)  # refused, reset, timed out, no route; requests' errors are OSErrors too


def _claim(engine: Engine, row, now: dt.datetime, owner: str, guard) -> int | None:
    """Claim a row for one attempt; the attempt's number (counting every attempt ever), or None if taken."""
    with engine.begin() as conn:
        if guard is not None:
            guard(conn)
        claimed = conn.execute(update(outbox).where(and_(
            outbox.c.id == row.id, outbox.c.status == "pending",
            outbox.c.next_attempt_at == row.next_attempt_at)).values(
                next_attempt_at=now + LEASE, attempts=outbox.c.attempts + 1)).rowcount
        if not claimed:
            return None
        done = conn.execute(select(func.max(delivery_attempts.c.attempt))
                            .where(delivery_attempts.c.outbox_id == row.id)).scalar() or 0
        conn.execute(insert(delivery_attempts).values(outbox_id=row.id, attempt=done + 1, started_utc=now,
                                                      outcome="sending", owner=owner))
        return done + 1


def _finish_attempt(conn: Connection, row, attempt: int, outcome: str, detail: str | None, now: dt.datetime) -> None:
    conn.execute(update(delivery_attempts).where(and_(delivery_attempts.c.outbox_id == row.id,
                                                      delivery_attempts.c.attempt == attempt))
                 .values(outcome=outcome, detail=detail, ended_utc=now))


def _prepare(transport, row, now: dt.datetime, attempt: int):
    if hasattr(transport, "prepare"):
        return transport.prepare(row, attempt)
    return build_message(row, transport.sender, now, attempt=attempt)


def send_due(engine: Engine, transport: Transport, now: dt.datetime, *, limit: int = 200,
             max_attempts: int = MAX_ATTEMPTS, base_delay_s: float = BASE_DELAY_S,
             max_delay_s: float = MAX_DELAY_S, channel: str = "email", owner: str = "",
             guard: Callable[[Connection], None] | None = None, stop: threading.Event | None = None,
             clock: Callable[[], dt.datetime] | None = None) -> SendSummary:
    """Send every pending message of ``channel`` due at ``now`` (oldest first, at most ``limit``).

    ``owner`` names the sender in the attempt records; ``guard(conn)`` runs
    in each claim's transaction and raises when this process may no longer
    act (the scheduler's lease); ``stop`` ends the round after the message
    in hand; ``clock`` times the attempts' ends (default: ``now``).
    """
    if now.tzinfo is None:
        raise ValueError("now must be an aware datetime (UTC)")
    clock = clock or (lambda: now)
    with engine.connect() as conn:
        rows = conn.execute(
            select(outbox)
            .where(and_(outbox.c.status == "pending", outbox.c.channel == channel, outbox.c.next_attempt_at <= now))
            .order_by(outbox.c.next_attempt_at, outbox.c.id).limit(limit)).all()
    sent = failed = dead = deferred = 0
    last_error = None
    down: set[str] = set()  # servers found unreachable this round
    session = transport.session() if hasattr(transport, "session") else contextlib.nullcontext(transport)
    with session as channel_out:
        for row in rows:
            if stop is not None and stop.is_set():
                break
            server = row.recipient if channel == "webhook" else "smtp"
            if server in down:
                deferred += 1
                continue
            attempt = _claim(engine, row, now, owner, guard)
            if attempt is None:
                continue
            try:
                answer = channel_out.send(_prepare(transport, row, now, attempt))
            except Exception as exc:  # any transport failure is retried, never lost
                if unreachable(exc):
                    down.add(server)
                attempts = row.attempts + 1
                error = last_error = f"{type(exc).__name__}: {exc}"[:2000]
                values = dict(last_error=error)
                if attempts >= max_attempts:
                    values["status"] = "dead"
                    dead += 1
                else:
                    values["next_attempt_at"] = now + retry_delay(attempts, base_delay_s, max_delay_s)
                    failed += 1
                with engine.begin() as conn:
                    conn.execute(update(outbox).where(outbox.c.id == row.id).values(**values))
                    _finish_attempt(conn, row, attempt, "failed", error, clock())
            else:
                with engine.begin() as conn:
                    conn.execute(update(outbox).where(outbox.c.id == row.id).values(
                        status="sent", sent_at=now, last_error=None))
                    _finish_attempt(conn, row, attempt, "accepted", str(answer)[:2000] if answer else None, clock())
                sent += 1
    return SendSummary(sent=sent, failed=failed, dead=dead, deferred=deferred, last_error=last_error)
