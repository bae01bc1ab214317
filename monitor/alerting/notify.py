"""Sending the outbox: due rows handed to a transport, failures retried with back-off.

:func:`send_due` hands every due ``pending`` row of the outbox
(:mod:`monitor.alerting.outbox`) to an injected transport
(:mod:`monitor.alerting.transports`) and records the result; a failure is
retried with exponential back-off, and after ``max_attempts`` failures the
row is marked ``dead`` and kept, with the last error, for an operator to
look at. Delivery is at-least-once: the Message-ID is derived from the
outbox row, so a message re-sent after a crash carries the same id and the
mailbox transport overwrites its own file.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from email.message import EmailMessage
from email.policy import default as _default_policy
from email.utils import format_datetime

from sqlalchemy import and_, select, update
from sqlalchemy.engine import Engine

# transport_from_config is named here too: monitor.app.service builds its transport as notify.transport_from_config.
from monitor.alerting.transports import Transport, transport_from_config  # noqa: F401
from monitor.store.schema import outbox

#: Defaults of the retry policy: first retry after 1 min, doubling, at most 6 h apart,
#: dead after 12 failed attempts (about 20 h of trying).
BASE_DELAY_S = 60.0
MAX_DELAY_S = 6 * 3600.0
MAX_ATTEMPTS = 12
HEADER_POLICY = _default_policy.clone(max_line_length=998)
#: How long a sender holds a message it is handing over before another sender may try it.
LEASE = dt.timedelta(minutes=5)


@dataclass(frozen=True)
class SendSummary:
    sent: int
    failed: int  # failed this round, will be retried
    dead: int    # failed for the last time this round, kept as "dead"


def retry_delay(attempts: int, base_delay_s: float = BASE_DELAY_S, max_delay_s: float = MAX_DELAY_S) -> dt.timedelta:
    """Back-off before the next try after ``attempts`` failures: base·2^(attempts−1), capped. [s]"""
    return dt.timedelta(seconds=min(base_delay_s * 2.0 ** (attempts - 1), max_delay_s))


def build_message(row, sender: str, now: dt.datetime) -> EmailMessage:
    """The RFC 5322 message for one outbox row; its Message-ID is stable per row."""
    # Long header lines instead of folding: Python's folder leaves a doubled space before an
    # encoded word (e.g. "1  µg/L") when a subject with non-ASCII text is folded. RFC 5322 §2.1.1
    # allows lines up to 998 characters; the body stays quoted-printable.
    msg = EmailMessage(policy=HEADER_POLICY)
    msg["From"] = sender
    msg["To"] = row.recipient
    msg["Subject"] = row.subject
    msg["Date"] = format_datetime(now.astimezone(dt.UTC))
    domain = sender.rpartition("@")[2] or "localhost"
    created = row.created_at.astimezone(dt.UTC).strftime("%Y%m%dT%H%M%SZ")
    msg["Message-ID"] = f"<bloomline-{created}-{row.id:07d}@{domain}>"
    msg["Auto-Submitted"] = "auto-generated"  # RFC 3834: no auto-replies, please
    msg.set_content(row.body, cte="quoted-printable")
    return msg


def send_due(engine: Engine, transport: Transport, now: dt.datetime, *, limit: int = 200,
             max_attempts: int = MAX_ATTEMPTS, base_delay_s: float = BASE_DELAY_S,
             max_delay_s: float = MAX_DELAY_S) -> SendSummary:
    """Send every pending message due at ``now`` (oldest first, at most ``limit``).

    Each row is first claimed with a :data:`LEASE` (so two senders never
    hand over the same row at once; after a crash it is retried when the
    lease ends) and each result is committed on its own. A failure increments ``attempts``, stores
    the error and schedules the next try ``retry_delay(attempts)`` later;
    the ``max_attempts``-th failure marks the row ``dead`` (kept).
    """
    if now.tzinfo is None:
        raise ValueError("now must be an aware datetime (UTC)")
    with engine.connect() as conn:
        rows = conn.execute(
            select(outbox)
            .where(and_(outbox.c.status == "pending", outbox.c.next_attempt_at <= now))
            .order_by(outbox.c.next_attempt_at, outbox.c.id).limit(limit)).all()
    sent = failed = dead = 0
    for row in rows:
        # Claim the row with a short lease, so a second sender running at the same time skips it.
        with engine.begin() as conn:
            claimed = conn.execute(update(outbox).where(and_(
                outbox.c.id == row.id, outbox.c.status == "pending",
                outbox.c.next_attempt_at == row.next_attempt_at)).values(next_attempt_at=now + LEASE)).rowcount
        if not claimed:
            continue
        try:
            transport.send(build_message(row, transport.sender, now))
        except Exception as exc:  # any transport failure is retried, never lost
            attempts = row.attempts + 1
            error = f"{type(exc).__name__}: {exc}"[:2000]
            values = dict(attempts=attempts, last_error=error)
            if attempts >= max_attempts:
                values["status"] = "dead"
                dead += 1
            else:
                values["next_attempt_at"] = now + retry_delay(attempts, base_delay_s, max_delay_s)
                failed += 1
            with engine.begin() as conn:
                conn.execute(update(outbox).where(outbox.c.id == row.id).values(**values))
        else:
            with engine.begin() as conn:
                conn.execute(update(outbox).where(outbox.c.id == row.id).values(
                    status="sent", attempts=row.attempts + 1, sent_at=now, last_error=None))
            sent += 1
    return SendSummary(sent=sent, failed=failed, dead=dead)
