"""Store functions that take an engine or a connection.

A function given an :class:`~sqlalchemy.engine.Engine` opens and commits
its own transaction; given a :class:`~sqlalchemy.engine.Connection` it
writes inside the caller's transaction, so several steps (a cycle's
checkpoint, forecast run, alert events and outbox rows) commit together.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager

from sqlalchemy.engine import Connection, Engine

Bind = Engine | Connection


@contextmanager
def begin(bind: Bind) -> Iterator[Connection]:
    """A connection in a transaction: the caller's own, or a new one committed on exit."""
    if isinstance(bind, Connection):
        yield bind
    else:
        with bind.begin() as conn:
            yield conn


@contextmanager
def reading(bind: Bind) -> Iterator[Connection]:
    """A connection to read with: the caller's own, or a new one closed on exit."""
    if isinstance(bind, Connection):
        yield bind
    else:
        with bind.connect() as conn:
            yield conn
