"""Subscribers to alert emails: synced from the config or signed up on the web.

A subscriber is one (email, water body) pair with the lowest alert level
they want to hear about (``min_level``). Every row carries a random token:
the confirmation and unsubscribe links in emails use it, so nobody needs an
account. Web sign-ups start inactive and become active only when the link
in the confirmation email is followed (double opt-in, common practice for
mailing lists), so an address cannot be subscribed by someone else.
Subscribers from the config are active at once; removing one from the
config deactivates it at the next sync (the row is kept).
"""

from __future__ import annotations

import datetime as dt
import re
import secrets
from collections.abc import Iterable
from dataclasses import dataclass

from sqlalchemy import and_, select, update
from sqlalchemy.engine import Connection, Engine

from monitor.store.schema import subscribers

# A pragmatic address check (one "@", a dot in the domain, no spaces); full
# RFC 5322 validation is neither possible with a regex nor useful here.
_EMAIL = re.compile(r"^[^@\s<>\"',;]+@[^@\s<>\"',;]+\.[^@\s<>\"',;]+$")


class SubscriptionError(ValueError):
    """A sign-up that cannot be accepted, with a message fit to show the user."""


@dataclass(frozen=True)
class Subscriber:
    id: int
    name: str
    email: str
    water_body_id: str
    min_level: int
    origin: str  # "config" | "web"
    token: str
    active: bool


def _row(r) -> Subscriber:
    return Subscriber(id=r.id, name=r.name, email=r.email, water_body_id=r.water_body_id,
                      min_level=int(r.min_level), origin=r.origin, token=r.token, active=bool(r.active))


def new_token() -> str:
    """A random URL-safe token [32 characters] for confirm/unsubscribe links."""
    return secrets.token_urlsafe(24)


def normalise_email(email: str) -> str:
    """The address trimmed, with the domain lower-cased; raise if it is not an address."""
    email = (email or "").strip()
    if len(email) > 320 or not _EMAIL.match(email):
        raise SubscriptionError(f"{email!r} is not an email address")
    local, _, domain = email.rpartition("@")
    return f"{local}@{domain.lower()}"


def sync_from_config(engine: Engine, config, now: dt.datetime) -> dict[str, int]:
    """Make the config's ``[[subscribers]]`` the active config-origin rows.

    Adds missing (email, water body) pairs, updates name and min_level,
    reactivates rows listed again and deactivates config rows no longer
    listed. Web sign-ups are left alone, except that a config entry for the
    same address and water body takes the row over. Returns counts
    ``{"added", "updated", "deactivated"}``.
    """
    wanted: dict[tuple[str, str], tuple[str, int]] = {}
    for sub in config.subscribers:
        email = normalise_email(sub.email)
        for wb in sub.water_bodies:
            wanted[(email, wb)] = (sub.name, int(sub.min_level))
    counts = {"added": 0, "updated": 0, "deactivated": 0}
    with engine.begin() as conn:
        existing = {(r.email, r.water_body_id): r for r in conn.execute(select(subscribers))}
        for (email, wb), (name, min_level) in wanted.items():
            r = existing.get((email, wb))
            if r is None:
                conn.execute(subscribers.insert().values(
                    name=name, email=email, water_body_id=wb, min_level=min_level, origin="config",
                    token=new_token(), active=1, created_at=now))
                counts["added"] += 1
            elif (r.name, r.min_level, r.origin, r.active) != (name, min_level, "config", 1):
                conn.execute(update(subscribers).where(subscribers.c.id == r.id).values(
                    name=name, min_level=min_level, origin="config", active=1))
                counts["updated"] += 1
        for key, r in existing.items():
            if r.origin == "config" and r.active and key not in wanted:
                conn.execute(update(subscribers).where(subscribers.c.id == r.id).values(active=0))
                counts["deactivated"] += 1
    return counts


def subscribe(engine: Engine, *, name: str, email: str, water_body_id: str, min_level: int,
              known_water_bodies: Iterable[str], max_level: int, now: dt.datetime) -> Subscriber:
    """Record a web sign-up, inactive until confirmed; return the row (with its token).

    Signing up again with the same address renews the token and the
    settings of an inactive row; an active row keeps its token and gets the
    new name and level. Raises :class:`SubscriptionError` on bad input.
    """
    email = normalise_email(email)
    name = (name or "").strip()[:200] or email.partition("@")[0]
    if water_body_id not in set(known_water_bodies):
        raise SubscriptionError(f"unknown water body {water_body_id!r}")
    if not 1 <= int(min_level) <= max_level:
        raise SubscriptionError(f"alert level must be between 1 and {max_level}, got {min_level}")
    with engine.begin() as conn:
        r = conn.execute(select(subscribers).where(and_(
            subscribers.c.email == email, subscribers.c.water_body_id == water_body_id))).first()
        if r is None:
            conn.execute(subscribers.insert().values(
                name=name, email=email, water_body_id=water_body_id, min_level=int(min_level),
                origin="web", token=new_token(), active=0, created_at=now))
        elif r.active:
            conn.execute(update(subscribers).where(subscribers.c.id == r.id).values(
                name=name, min_level=int(min_level)))
        else:
            conn.execute(update(subscribers).where(subscribers.c.id == r.id).values(
                name=name, min_level=int(min_level), token=new_token()))
        r = conn.execute(select(subscribers).where(and_(
            subscribers.c.email == email, subscribers.c.water_body_id == water_body_id))).one()
    return _row(r)


def by_token(engine: Engine, token: str) -> Subscriber | None:
    """The subscriber with this token, or None."""
    with engine.connect() as conn:
        r = conn.execute(select(subscribers).where(subscribers.c.token == token)).first()
    return _row(r) if r is not None else None


def confirm(engine: Engine, token: str) -> Subscriber | None:
    """Activate the subscription with this token; None if the token is unknown."""
    with engine.begin() as conn:
        n = conn.execute(update(subscribers).where(subscribers.c.token == token).values(active=1)).rowcount
    return by_token(engine, token) if n else None


def unsubscribe(engine: Engine, token: str) -> Subscriber | None:
    """Deactivate the subscription with this token (the row is kept); None if unknown."""
    with engine.begin() as conn:
        n = conn.execute(update(subscribers).where(subscribers.c.token == token).values(active=0)).rowcount
    return by_token(engine, token) if n else None


def subscribers_for(conn: Connection | Engine, water_body_id: str, level: int) -> list[Subscriber]:
    """Active subscribers of a water body whose ``min_level`` is at most ``level``."""
    q = (select(subscribers)
         .where(and_(subscribers.c.water_body_id == water_body_id, subscribers.c.active == 1,
                     subscribers.c.min_level <= int(level)))
         .order_by(subscribers.c.id))
    if isinstance(conn, Engine):
        with conn.connect() as c:
            return [_row(r) for r in c.execute(q)]
    return [_row(r) for r in conn.execute(q)]


def list_subscribers(engine: Engine, water_body_id: str | None = None, *,
                     active_only: bool = True) -> list[Subscriber]:
    """Subscribers, optionally of one water body, active ones only by default."""
    q = select(subscribers).order_by(subscribers.c.water_body_id, subscribers.c.id)
    if water_body_id is not None:
        q = q.where(subscribers.c.water_body_id == water_body_id)
    if active_only:
        q = q.where(subscribers.c.active == 1)
    with engine.connect() as conn:
        return [_row(r) for r in conn.execute(q)]
