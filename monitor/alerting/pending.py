"""Changes to an active subscription wait for the subscriber's own confirmation.

A sign-up form can be filled in by anyone, so a sign-up for an address
that already receives alerts changes nothing by itself: the address gets
an email with a link that applies the asked-for name and level. The link
carries the subscriber's own token (the one in the unsubscribe link of
every alert they receive), so only someone who reads that mailbox can
follow it; the settings in the link are applied with
:func:`monitor.alerting.subscriptions.subscribe`, which updates an active
row in place. Nothing is stored until then.
"""

from __future__ import annotations

import datetime as dt
from urllib.parse import urlencode

from sqlalchemy.engine import Engine

from monitor.alerting.caution import CAUTION
from monitor.alerting.levels import level_label
from monitor.alerting.outbox import enqueue
from monitor.alerting.subscriptions import Subscriber, list_subscribers, normalise_email


def find(engine: Engine, email: str, water_body_id: str) -> Subscriber | None:
    """The subscriber row of this address (normalised) and water body, active or not, or None."""
    email = normalise_email(email)
    return next((s for s in list_subscribers(engine, water_body_id, active_only=False) if s.email == email), None)


def change_path(subscriber: Subscriber, *, name: str, min_level: int) -> str:
    """The path (with query) of the link that applies a change to ``subscriber``."""
    return f"/subscribe/change/{subscriber.token}?" + urlencode({"min_level": int(min_level), "name": name})


def enqueue_change_confirmation(engine: Engine, water_body, subscriber: Subscriber, *, name: str, min_level: int,
                                base_url: str, now: dt.datetime) -> int:
    """Queue the email asking an active subscriber to confirm a change; return the outbox id."""
    link = base_url.rstrip("/") + change_path(subscriber, name=name, min_level=min_level)
    subject = f"Bloomline: confirm the change to your alert emails for {water_body.name}"
    body = "\n".join([
        f"Someone, probably you, asked to change the Bloomline alert emails for {water_body.name} "
        f"sent to this address: from {level_label(water_body, min_level)} and above, addressed to {name}.",
        "",
        f"Apply the change: {link}",
        "",
        f"If you did not ask for this, ignore this email: your alerts stay as they are "
        f"(from {level_label(water_body, subscriber.min_level)}).",
        "",
        CAUTION,
    ]) + "\n"
    with engine.begin() as conn:
        return enqueue(conn, recipient=subscriber.email, subject=subject, body=body, now=now)
