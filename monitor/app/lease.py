"""One actor: the scheduler lease, so only one of several schedulers on a database acts.

A scheduler acts only while it holds the lease. It is won with a lock the
operating system or the database server releases the moment its holder dies:

* PostgreSQL: a session advisory lock (``pg_try_advisory_lock``) on a
  connection held for as long as the scheduler leads, keyed by the schema;
* SQLite: an exclusive ``flock`` on a file beside the database file;
* otherwise (an in-memory database): expiry of the lease row alone.

The lease row (:mod:`monitor.store.lease`) records holder, heartbeat and
term; the leader renews it every ``lease_seconds / 3`` and every write
transaction of a job confirms it (:meth:`SchedulerLease.guard`), so a
process that lost the lease cannot commit. A waiting scheduler tries again
every ``lease_seconds / 3``: it takes over within that time of the leader's
death when a lock is available, within ``lease_seconds`` (plus one try)
when only expiry is.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import logging
import os
from pathlib import Path

from sqlalchemy import text
from sqlalchemy.engine import Connection, Engine

from monitor.store import lease as rows
from monitor.timeutil import UTC

NAME = "scheduler"
log = logging.getLogger("bloomline")


def _wall_now() -> dt.datetime:
    return dt.datetime.now(UTC)


class _AdvisoryLock:
    """A PostgreSQL session advisory lock, keyed by the schema and the lease name."""

    SQL_KEY = "hashtext(current_schema() || ':bloomline:' || :name)"

    def __init__(self, engine: Engine, name: str):
        self.engine, self.name, self.conn = engine, name, None

    def try_acquire(self) -> bool:
        try:
            if self.conn is None:
                self.conn = self.engine.connect()
            got = bool(self.conn.execute(text(f"SELECT pg_try_advisory_lock({self.SQL_KEY})"),
                                         {"name": self.name}).scalar())
            self.conn.commit()
            return got
        except Exception:  # noqa: BLE001 - a broken connection: drop it and try again later
            self._drop()
            return False

    def alive(self) -> bool:
        try:
            self.conn.execute(text("SELECT 1"))
            self.conn.commit()
            return True
        except Exception:  # noqa: BLE001
            self._drop()
            return False

    def release(self) -> None:
        """Unlock at once (``pg_advisory_unlock_all``, answered before a waiting scheduler's next try), then
        end the session, so the connection never goes back to the pool holding a lock."""
        if self.conn is not None:
            with contextlib.suppress(Exception):
                self.conn.execute(text("SELECT pg_advisory_unlock_all()"))
                self.conn.commit()
        self._drop()

    def close(self) -> None:
        self.release()

    def _drop(self) -> None:
        if self.conn is not None:
            with contextlib.suppress(Exception):
                self.conn.invalidate()  # closes the database session itself
            with contextlib.suppress(Exception):
                self.conn.close()
            self.conn = None


class _FileLock:
    """An exclusive ``flock`` on ``<database>.scheduler-lock`` (released by the kernel when the process dies)."""

    def __init__(self, path: Path):
        self.path, self.fd = path, None

    def try_acquire(self) -> bool:
        import fcntl

        if self.fd is not None:
            return True
        fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o644)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            os.close(fd)
            return False
        self.fd = fd
        return True

    def alive(self) -> bool:
        return self.fd is not None

    def release(self) -> None:
        if self.fd is not None:
            os.close(self.fd)  # closing the descriptor drops the flock
            self.fd = None

    def close(self) -> None:
        self.release()


def _lock_for(engine: Engine, name: str):
    if engine.dialect.name == "postgresql":
        return _AdvisoryLock(engine, name)
    database = engine.url.database
    if engine.dialect.name == "sqlite" and database and database != ":memory:" and os.name == "posix":
        return _FileLock(Path(f"{database}.{name}-lock"))
    return None


class SchedulerLease:
    """The lease of one scheduler process (``holder``, e.g. ``host:pid``) on ``engine``'s database."""

    def __init__(self, engine: Engine, *, holder: str, seconds: float, name: str = NAME):
        self.engine, self.holder, self.seconds, self.name = engine, holder, float(seconds), name
        self.lock = _lock_for(engine, name)
        self.term: int | None = None

    @property
    def held(self) -> bool:
        return self.term is not None

    def acquire(self) -> bool:
        """Try once to become the acting scheduler; True when this process holds the lease.

        A database that cannot be reached is a "not now" (logged), not a crash.
        """
        if self.lock is not None and not self.lock.try_acquire():
            return False
        try:
            term = rows.take(self.engine, self.name, self.holder, now=_wall_now(), seconds=self.seconds,
                             force=self.lock is not None)
        except Exception as exc:  # noqa: BLE001 - try again at the next poll
            log.warning("could not take the scheduler lease: %s", exc, extra={"event": "lease.error"})
            term = None
        if term is None:
            if self.lock is not None:
                self.lock.release()
            return False
        self.term = term
        return True

    def renew(self) -> bool:
        """Heartbeat; False (and the lease dropped) when it was lost."""
        if self.term is None:
            return False
        try:
            ok = (self.lock is None or self.lock.alive()) and rows.renew(
                self.engine, self.name, self.holder, self.term, now=_wall_now(), seconds=self.seconds)
        except Exception as exc:  # noqa: BLE001 - an unconfirmed lease is a lost one: step down, try again
            log.warning("could not renew the scheduler lease: %s", exc, extra={"event": "lease.error"})
            ok = False
        if not ok:
            self.term = None
            if self.lock is not None:
                self.lock.release()
        return ok

    def guard(self, conn: Connection) -> None:
        """Fence for a job's write transaction: raises :class:`monitor.store.lease.LeaseLost` unless still held."""
        if self.term is None:
            raise rows.LeaseLost(f"the scheduler lease {self.name!r} is not held by {self.holder}")
        rows.confirm(conn, self.name, self.holder, self.term)

    def release(self) -> None:
        """Give the lease up so a waiting scheduler takes over at once."""
        if self.term is not None:
            with contextlib.suppress(Exception):
                rows.release(self.engine, self.name, self.holder, self.term, now=_wall_now())
            self.term = None
        if self.lock is not None:
            self.lock.release()

    def close(self) -> None:
        self.release()
        if self.lock is not None:
            self.lock.close()
