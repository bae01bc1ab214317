"""Alert emails: rendering, the outbox, transports and the sending loop.

An alert change becomes one ``outbox`` row per subscriber (the pair
``(event_id, recipient)`` is unique, so an event can never be queued twice
for one address). :func:`send_due` hands due rows to an injected transport
and records the result; a failure is retried with exponential back-off, and
after ``max_attempts`` failures the row is marked ``dead`` and kept, with
the last error, for an operator to look at (:func:`requeue_dead`). Nothing
is ever deleted. Delivery is at-least-once: the Message-ID is derived from
the outbox row, so a message re-sent after a crash carries the same id and
the mailbox transport overwrites its own file.

Two transports: :class:`MailboxTransport` writes one ``.eml`` file per
message into a folder (the demo's mailbox), :class:`SmtpTransport` talks to
an SMTP server with :mod:`smtplib`.
"""

from __future__ import annotations

import datetime as dt
import os
import re
import smtplib
import tempfile
from dataclasses import dataclass
from email.message import EmailMessage
from email.policy import default as _default_policy
from email.utils import format_datetime
from pathlib import Path
from typing import Protocol

from sqlalchemy import and_, select, update
from sqlalchemy.engine import Connection, Engine

from monitor.alerting.caution import CAUTION
from monitor.alerting.frameworks import FRAMEWORKS
from monitor.store.schema import outbox
from monitor.alerting.subscriptions import Subscriber, subscribers_for

#: Defaults of the retry policy: first retry after 1 min, doubling, at most 6 h apart,
#: dead after 12 failed attempts (about 20 h of trying).
BASE_DELAY_S = 60.0
MAX_DELAY_S = 6 * 3600.0
MAX_ATTEMPTS = 12
HEADER_POLICY = _default_policy.clone(max_line_length=998)
#: How long a sender holds a message it is handing over before another sender may try it.
LEASE = dt.timedelta(minutes=5)


# --------------------------------------------------------------------------
# Rendering


def level_label(water_body, level: int) -> str:
    """'Alert Level 1 (1 µg/L)' for a level number, 'no alert level' for 0."""
    if level <= 0:
        return "no alert level"
    lv = water_body.alerts.levels[level - 1]
    return f"{lv.name} ({lv.chlorophyll_ugL:g} µg/L)"


def framework_line(water_body) -> str:
    """The framework in use, with its source, in one sentence."""
    fw = FRAMEWORKS.get(water_body.alerts.framework)
    if fw is None:
        return f"Alert levels: {water_body.alerts.framework} (levels set in this water body's configuration)."
    return f"Alert levels: {fw.title}. Source: {fw.source}"


def basin_name(water_body, basin_id: str) -> str:
    for b in water_body.basins:
        if b.id == basin_id:
            return b.name
    return basin_id


def _fmt_time(t: dt.datetime) -> str:
    return t.astimezone(dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")


def _why(water_body, event: dict) -> str:
    parts = []
    p = event.get("probability")
    level = max(event["to_level"], event["from_level"])  # a lowering reports the level it left
    if p is not None:
        parts.append(f"forecast probability of reaching {level_label(water_body, level)} within "
                     f"{water_body.alerts.horizon_days} days: {100 * p:.0f} % (a warning is raised at "
                     f"{100 * water_body.alerts.warn_probability:.0f} %)")
    else:
        parts.append("no forecast probability was available for this cycle")
    obs = event.get("observed_ugL")
    if obs is not None:
        parts.append(f"latest observed daily mean of cyanobacterial chlorophyll-a (phycocyanin sensor): {obs:.2f} µg/L")
    else:
        parts.append("no QC-passed observation of cyanobacterial chlorophyll-a in the latest day")
    return "; ".join(parts) + "."


def render_alert(water_body, event: dict, *, base_url: str, subscriber: Subscriber | None = None) -> tuple[str, str]:
    """Subject and plain-text body of the email for one alert change.

    ``event`` is a dict as returned by :func:`monitor.alerting.rules.evaluate_run`
    (water_body_id, basin_id, time_utc, from_level, to_level, probability,
    observed_ugL, reason). A lowering to level 0 is the "cleared" email; it
    says that no alert level is forecast, never that the water is safe.
    """
    basin = basin_name(water_body, event["basin_id"])
    where = f"{basin}, {water_body.name}"
    old, new = event["from_level"], event["to_level"]
    page = f"{base_url.rstrip('/')}/water-bodies/{water_body.id}"
    if new > old:
        subject = f"Bloomline alert: {where} raised to {level_label(water_body, new)}"
        lv = water_body.alerts.levels[new - 1]
        first = (f"The alert level for {where} has been raised from {level_label(water_body, old)} "
                 f"to {level_label(water_body, new)}"
                 + (f": {lv.meaning}." if lv.meaning else "."))
    elif new == 0:
        subject = f"Bloomline: {where} cleared, no alert level forecast"
        first = (f"The alert for {where} has been cleared: {level_label(water_body, old)} is no longer "
                 f"forecast for the next {water_body.alerts.horizon_days} days and the latest observation "
                 "is below it. No alert level is forecast. This is not a safety clearance: check the "
                 "authority's advisories before using the water.")
    else:
        subject = f"Bloomline: {where} lowered to {level_label(water_body, new)}"
        first = (f"The alert level for {where} has been lowered from {level_label(water_body, old)} "
                 f"to {level_label(water_body, new)}. {level_label(water_body, new)} still applies.")
    lines = [
        first,
        "",
        "Why: " + _why(water_body, event),
        f"Analysis time: {_fmt_time(event['time_utc'])}",
        framework_line(water_body),
        "",
        f"Forecast and history: {page}",
        "",
        CAUTION,
    ]
    if subscriber is not None:
        lines += [
            "",
            f"You receive this because {subscriber.email} is subscribed to alerts for {water_body.name} "
            f"at {level_label(water_body, subscriber.min_level)} and above.",
            f"Unsubscribe: {base_url.rstrip('/')}/unsubscribe/{subscriber.token}",
        ]
    return subject, "\n".join(lines) + "\n"


def render_confirmation(water_body, subscriber: Subscriber, *, base_url: str) -> tuple[str, str]:
    """Subject and body of the email asking a web sign-up to confirm its address."""
    subject = f"Bloomline: confirm your alert subscription for {water_body.name}"
    body = "\n".join([
        f"Someone, probably you, asked to receive Bloomline alert emails for {water_body.name} "
        f"at {level_label(water_body, subscriber.min_level)} and above.",
        "",
        f"Confirm: {base_url.rstrip('/')}/subscribe/confirm/{subscriber.token}",
        "",
        "If you did not ask for this, ignore this email: nothing is sent until the link is followed.",
        "",
        CAUTION,
    ]) + "\n"
    return subject, body


# --------------------------------------------------------------------------
# The outbox


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


# --------------------------------------------------------------------------
# Transports


class Transport(Protocol):
    sender: str

    def send(self, message: EmailMessage) -> None:
        """Deliver one message or raise."""


class MailboxTransport:
    """Write each message as ``<folder>/<name>.eml`` (RFC 5322 text); the demo's mailbox.

    The file name comes from the Message-ID, so sending the same outbox row
    twice leaves one file. Files are written to a temporary name and renamed,
    so a reader never sees half a message.
    """

    def __init__(self, folder: str | os.PathLike, sender: str = "bloomline@localhost"):
        self.folder = Path(folder)
        self.sender = sender

    def send(self, message: EmailMessage) -> None:
        self.folder.mkdir(parents=True, exist_ok=True)
        stem = re.sub(r"[^A-Za-z0-9._-]+", "_", message["Message-ID"].strip("<>").partition("@")[0])
        fd, tmp = tempfile.mkstemp(dir=self.folder, prefix=".tmp-", suffix=".eml")
        try:
            with os.fdopen(fd, "wb") as fh:
                fh.write(message.as_bytes())
            os.replace(tmp, self.folder / f"{stem}.eml")
        except BaseException:
            if os.path.exists(tmp):
                os.unlink(tmp)
            raise


class SmtpTransport:
    """Send through an SMTP server (``monitor.config.SmtpConfig``), one connection per message."""

    def __init__(self, smtp_config):
        self.config = smtp_config
        self.sender = smtp_config.sender

    def send(self, message: EmailMessage) -> None:
        c = self.config
        with smtplib.SMTP(c.host, c.port, timeout=c.timeout_s) as smtp:
            if c.starttls:
                smtp.starttls()
            if c.username:
                smtp.login(c.username, c.password or "")
            smtp.send_message(message)


def transport_from_config(config) -> Transport:
    """The mailbox transport when ``service.mailbox_dir`` is set, otherwise SMTP."""
    if config.service.mailbox_dir is not None:
        return MailboxTransport(config.service.mailbox_dir, sender=config.smtp.sender)
    return SmtpTransport(config.smtp)


# --------------------------------------------------------------------------
# Sending


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
    msg["Date"] = format_datetime(now.astimezone(dt.timezone.utc))
    domain = sender.rpartition("@")[2] or "localhost"
    created = row.created_at.astimezone(dt.timezone.utc).strftime("%Y%m%dT%H%M%SZ")
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


def requeue_dead(engine: Engine, now: dt.datetime) -> int:
    """Give every dead message a fresh set of attempts, due now; return how many."""
    with engine.begin() as conn:
        return conn.execute(update(outbox).where(outbox.c.status == "dead").values(
            status="pending", attempts=0, next_attempt_at=now)).rowcount


def outbox_counts(engine: Engine) -> dict[str, int]:
    """Number of outbox rows per status."""
    from sqlalchemy import func

    with engine.connect() as conn:
        return {r.status: int(r.n) for r in conn.execute(
            select(outbox.c.status, func.count().label("n")).group_by(outbox.c.status))}
