"""The scheduler lease row: who may act, since when, and a term raised at every takeover.

Only the rows live here; how a process wins the lease (an advisory lock on
PostgreSQL, a file lock beside an SQLite file, or expiry) is
:mod:`monitor.app.lease`. Times are wall-clock UTC. :func:`confirm` is the
fence: run inside a transaction it refuses the transaction unless the
caller still holds the lease in the same term.
"""

from __future__ import annotations

import datetime as dt

from sqlalchemy import and_, insert, select, update
from sqlalchemy.engine import Connection
from sqlalchemy.exc import IntegrityError

from monitor.store.schema import scheduler_lease
from monitor.store.txn import Bind, begin, reading

t = scheduler_lease


class LeaseLost(RuntimeError):
    """This process no longer holds the scheduler lease: it must not act."""


def read(bind: Bind, name: str) -> dict | None:
    """The lease row as a dict, or None."""
    with reading(bind) as conn:
        row = conn.execute(select(t).where(t.c.name == name)).first()
    return dict(row._mapping) if row else None


def take(bind: Bind, name: str, holder: str, *, now: dt.datetime, seconds: float, force: bool) -> int | None:
    """Take the lease for ``holder``; its new term, or None while another holder's lease runs.

    ``force`` (the caller holds the lock that proves the last holder gone)
    takes it whatever the row says; otherwise only when absent, expired or
    already ``holder``'s.
    """
    expires = now + dt.timedelta(seconds=seconds)
    try:
        with begin(bind) as conn:
            row = conn.execute(select(t).where(t.c.name == name)).first()
            if row is None:
                conn.execute(insert(t).values(name=name, holder=holder, term=1, acquired_utc=now, heartbeat_utc=now,
                                              expires_utc=expires))
                return 1
            if not (force or row.holder == holder or row.expires_utc <= now):
                return None
            term = int(row.term) + 1
            taken = conn.execute(update(t).where(and_(t.c.name == name, t.c.term == row.term)).values(
                holder=holder, term=term, acquired_utc=now, heartbeat_utc=now, expires_utc=expires)).rowcount
            return term if taken else None
    except IntegrityError:  # another process inserted the row first
        return None


def renew(bind: Bind, name: str, holder: str, term: int, *, now: dt.datetime, seconds: float) -> bool:
    """Heartbeat: extend the lease; False when it is no longer ``holder``'s in ``term``."""
    with begin(bind) as conn:
        return conn.execute(update(t).where(and_(t.c.name == name, t.c.holder == holder, t.c.term == term)).values(
            heartbeat_utc=now, expires_utc=now + dt.timedelta(seconds=seconds))).rowcount == 1


def release(bind: Bind, name: str, holder: str, term: int, *, now: dt.datetime) -> None:
    """Give the lease up (it expires now), so a waiting scheduler takes over at once."""
    with begin(bind) as conn:
        conn.execute(update(t).where(and_(t.c.name == name, t.c.holder == holder, t.c.term == term))
                     .values(expires_utc=now, heartbeat_utc=now))


def confirm(conn: Connection, name: str, holder: str, term: int) -> None:
    """Inside a transaction: raise :class:`LeaseLost` unless ``holder`` still holds the lease in ``term``.

    It writes the row (the holder unchanged), so on SQLite the transaction
    takes the write lock here and on PostgreSQL the row stays locked until
    commit: a takeover cannot slip in between the check and the commit.
    """
    held = conn.execute(update(t).where(and_(t.c.name == name, t.c.holder == holder, t.c.term == term))
                        .values(holder=holder)).rowcount
    if held != 1:
        raise LeaseLost(f"the scheduler lease {name!r} is no longer held by {holder} (term {term})")
