"""What each http-pull feed remembers between polls, kept in the store so a restart keeps it.

Rows are plain dicts of the ``pull_states`` columns; the feed reader
(:mod:`monitor.ingest.feeds.http_pull`) turns them into its ``PullState``.
"""

from __future__ import annotations

import datetime as dt

from sqlalchemy import insert, select, update

from monitor.store.schema import pull_states
from monitor.store.txn import Bind, begin, reading

FIELDS = ("etag", "last_modified", "last_sha256", "failures", "next_attempt_utc", "last_error", "last_status",
          "history")


def load_all(bind: Bind) -> dict[str, dict]:
    """Every stored pull state: feed name → {field: value}."""
    with reading(bind) as conn:
        return {r.feed: {f: getattr(r, f) for f in (*FIELDS, "updated_utc")}
                for r in conn.execute(select(pull_states))}


def save(bind: Bind, feed: str, values: dict, *, now: dt.datetime) -> None:
    """Insert or replace the state of one feed (``values`` holds :data:`FIELDS`)."""
    row = {f: values.get(f) for f in FIELDS}
    row["failures"] = int(row["failures"] or 0)
    with begin(bind) as conn:
        if conn.execute(update(pull_states).where(pull_states.c.feed == feed).values(**row, updated_utc=now)).rowcount:
            return
        conn.execute(insert(pull_states).values(feed=feed, **row, updated_utc=now))
