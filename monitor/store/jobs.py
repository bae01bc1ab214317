"""Job records: every run of a scheduled job (an ingest round, one water body's cycle, a send round).

A run is written when it starts (outcome ``running``) and finished with
its outcome (``ok`` or ``failed``), error and counts; a run whose process
died stays ``running`` until the next scheduler to act marks it
``interrupted`` (:func:`interrupt_unfinished`). Read models for pages,
the API and ``bloomline health`` are in :mod:`monitor.store.health`.
"""

from __future__ import annotations

import datetime as dt
import os
import socket

from sqlalchemy import and_, delete, insert, update

from monitor.store.schema import job_runs
from monitor.store.txn import Bind, begin

OUTCOMES = ("running", "ok", "failed", "interrupted")


def process_id() -> str:
    """``host:pid`` of this process: the owner named in job runs, attempts and the lease."""
    return f"{socket.gethostname()}:{os.getpid()}"


def start_job(bind: Bind, job: str, *, now: dt.datetime, owner: str, water_body_id: str | None = None,
              scheduled_utc: dt.datetime | None = None) -> int:
    """Record the start of a job run; return its id."""
    with begin(bind) as conn:
        return int(conn.execute(insert(job_runs).values(
            job=job, water_body_id=water_body_id, scheduled_utc=scheduled_utc, started_utc=now,
            outcome="running", owner=owner)).inserted_primary_key[0])


def finish_job(bind: Bind, run_id: int, *, now: dt.datetime, outcome: str, duration_s: float,
               error: str | None = None, counts: dict | None = None) -> None:
    """Record the end of a job run: outcome (``ok`` | ``failed``), wall-clock duration [s], error, counts."""
    if outcome not in OUTCOMES[1:]:
        raise ValueError(f"outcome must be one of {', '.join(OUTCOMES[1:])}, got {outcome!r}")
    with begin(bind) as conn:
        conn.execute(update(job_runs).where(job_runs.c.id == run_id).values(
            ended_utc=now, outcome=outcome, duration_s=float(duration_s),
            error=error[:4000] if error else None, counts=counts))


def interrupt_unfinished(bind: Bind, *, owner: str, now: dt.datetime) -> int:
    """Mark every run still ``running`` under another owner ``interrupted`` (its process died); return how many."""
    with begin(bind) as conn:
        return conn.execute(update(job_runs).where(and_(job_runs.c.outcome == "running", job_runs.c.owner != owner))
                            .values(outcome="interrupted", ended_utc=now,
                                    error="the process running this job stopped before it finished")).rowcount


def prune_job_runs(bind: Bind, *, before: dt.datetime) -> int:
    """Delete finished job runs that started before ``before``; return how many went."""
    with begin(bind) as conn:
        return conn.execute(delete(job_runs).where(and_(job_runs.c.started_utc < before,
                                                        job_runs.c.outcome != "running"))).rowcount
