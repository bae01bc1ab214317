"""Read models of the service's health: job runs, failing jobs, stale feeds, the scheduler and the outbox.

For the health page and the API (``web.health``) and ``bloomline health``.
:func:`health_report` gathers them and says what is wrong: a job whose
last ``max_failures`` runs all failed, a feed with no stored batch for
longer than ``stale_after``, an HTTP pull failing, a scheduler whose
heartbeat stopped, messages dead in the outbox.
"""

from __future__ import annotations

import datetime as dt

from sqlalchemy import and_, func, select

from monitor.store.schema import ingest_batches, job_runs, outbox, pull_states, scheduler_lease
from monitor.store.txn import Bind, reading

DEFAULT_MAX_FAILURES = 3
DEFAULT_STALE_AFTER = dt.timedelta(hours=24)


def _run(r) -> dict:
    return {"id": r.id, "job": r.job, "water_body": r.water_body_id,
            "scheduled_utc": r.scheduled_utc.isoformat() if r.scheduled_utc else None,
            "started_utc": r.started_utc.isoformat(), "ended_utc": r.ended_utc.isoformat() if r.ended_utc else None,
            "duration_s": r.duration_s, "outcome": r.outcome, "error": r.error, "counts": r.counts, "owner": r.owner}


def job_runs_list(bind: Bind, *, job: str | None = None, water_body: str | None = None, limit: int = 50,
                  before_id: int | None = None) -> list[dict]:
    """The newest job runs first (at most ``limit``), optionally of one job or water body, older than an id."""
    q = select(job_runs)
    if job is not None:
        q = q.where(job_runs.c.job == job)
    if water_body is not None:
        q = q.where(job_runs.c.water_body_id == water_body)
    if before_id is not None:
        q = q.where(job_runs.c.id < before_id)
    with reading(bind) as conn:
        return [_run(r) for r in conn.execute(q.order_by(job_runs.c.id.desc()).limit(limit))]


def job_summary(bind: Bind, *, max_failures: int = DEFAULT_MAX_FAILURES) -> list[dict]:
    """Per (job, water body): the last run, the last success, the failures in a row, and ``failing``
    when the last ``max_failures`` finished runs all failed."""
    with reading(bind) as conn:
        keys = conn.execute(select(job_runs.c.job, job_runs.c.water_body_id).distinct()).all()
        out = []
        for job, wb in sorted(keys, key=lambda k: (k[0], k[1] or "")):
            where = and_(job_runs.c.job == job,
                         job_runs.c.water_body_id.is_(None) if wb is None else job_runs.c.water_body_id == wb)
            recent = conn.execute(select(job_runs).where(and_(where, job_runs.c.outcome != "running"))
                                  .order_by(job_runs.c.id.desc()).limit(max(max_failures, 1))).all()
            last_ok = conn.execute(select(func.max(job_runs.c.started_utc))
                                   .where(and_(where, job_runs.c.outcome == "ok"))).scalar()
            streak = 0
            for r in recent:
                if r.outcome == "ok":
                    break
                streak += 1
            out.append({"job": job, "water_body": wb, "last": _run(recent[0]) if recent else None,
                        "last_ok_utc": last_ok.isoformat() if last_ok else None,
                        "failures_in_a_row": streak,
                        "failing": len(recent) >= max_failures and streak >= max_failures})
    return out


def feed_health(bind: Bind, config, now: dt.datetime, *, stale_after: dt.timedelta = DEFAULT_STALE_AFTER) -> list[dict]:
    """Per configured feed: the last stored batch and (HTTP pull) the pull state; ``stale`` when no
    batch that did not fail was received within ``stale_after`` of ``now``."""
    with reading(bind) as conn:
        last_ok = dict(conn.execute(select(ingest_batches.c.feed, func.max(ingest_batches.c.received_at))
                                    .where(ingest_batches.c.status != "failed").group_by(ingest_batches.c.feed)).all())
        last_any = {r.feed: r for r in conn.execute(
            select(ingest_batches).where(ingest_batches.c.id.in_(
                select(func.max(ingest_batches.c.id)).group_by(ingest_batches.c.feed))))}
        pulls = {r.feed: r for r in conn.execute(select(pull_states))}
    out = []
    for feed in config.feeds:
        ok_at = last_ok.get(feed.name)
        last = last_any.get(feed.name)
        pull = pulls.get(feed.name)
        entry = {"feed": feed.name, "kind": feed.kind,
                 "last_batch_utc": ok_at.isoformat() if ok_at else None,
                 "age_s": (now - ok_at).total_seconds() if ok_at else None,
                 "last_status": last.status if last else None,
                 "last_message": last.message if last is not None and last.status == "failed" else None,
                 "stale": ok_at is None or now - ok_at > stale_after}
        if pull is not None:
            entry["pull"] = {"failures": pull.failures, "last_error": pull.last_error, "last_status": pull.last_status,
                             "next_attempt_utc": pull.next_attempt_utc.isoformat() if pull.next_attempt_utc else None}
        out.append(entry)
    return out


def scheduler_state(bind: Bind, now: dt.datetime) -> dict | None:
    """The scheduler lease: holder, term, heartbeat and its age [s] (wall clock), or None if none ever ran."""
    with reading(bind) as conn:
        row = conn.execute(select(scheduler_lease).where(scheduler_lease.c.name == "scheduler")).first()
    if row is None:
        return None
    return {"holder": row.holder, "term": row.term, "acquired_utc": row.acquired_utc.isoformat(),
            "heartbeat_utc": row.heartbeat_utc.isoformat(), "heartbeat_age_s": (now - row.heartbeat_utc).total_seconds(),
            "released": row.expires_utc <= row.heartbeat_utc, "expires_utc": row.expires_utc.isoformat()}


def outbox_health(bind: Bind) -> dict:
    """Outbox rows per channel and status."""
    with reading(bind) as conn:
        counts: dict[str, dict[str, int]] = {}
        for channel, status, n in conn.execute(select(outbox.c.channel, outbox.c.status, func.count())
                                               .group_by(outbox.c.channel, outbox.c.status)):
            counts.setdefault(channel, {})[status] = int(n)
    return counts


def health_report(bind: Bind, config, *, now: dt.datetime, wall_now: dt.datetime | None = None,
                  max_failures: int = DEFAULT_MAX_FAILURES, stale_after: dt.timedelta = DEFAULT_STALE_AFTER,
                  lease_seconds: float | None = None) -> dict:
    """Everything above, and ``problems``: one sentence per thing that is wrong; ``ok`` when there is none.

    ``now`` is the service clock (jobs and feeds), ``wall_now`` the wall
    clock (the scheduler's heartbeat; default ``now``); a heartbeat older
    than two ``lease_seconds`` (default the config's) on a lease not released
    is a problem.
    """
    wall_now = wall_now or now
    lease_seconds = lease_seconds or config.schedule.lease_seconds
    jobs = job_summary(bind, max_failures=max_failures)
    feeds = feed_health(bind, config, now, stale_after=stale_after)
    scheduler = scheduler_state(bind, wall_now)
    box = outbox_health(bind)
    problems = []
    for j in jobs:
        if j["failing"]:
            where = f" for {j['water_body']}" if j["water_body"] else ""
            problems.append(f"job {j['job']}{where} failed {j['failures_in_a_row']} times in a row; "
                            f"last error: {(j['last'] or {}).get('error')}")
    for f in feeds:
        if f["stale"]:
            age = "no data received yet" if f["age_s"] is None else f"last data {f['age_s'] / 3600:.1f} h ago"
            problems.append(f"feed {f['feed']} is stale: {age}")
        pull = f.get("pull")
        if pull and pull["failures"] >= max_failures:
            problems.append(f"feed {f['feed']}: {pull['failures']} failed pulls in a row ({pull['last_error']})")
    if scheduler is not None and not scheduler["released"] and scheduler["heartbeat_age_s"] > 2 * lease_seconds:
        problems.append(f"scheduler {scheduler['holder']} has not sent a heartbeat for "
                        f"{scheduler['heartbeat_age_s']:.0f} s")
    dead = sum(c.get("dead", 0) for c in box.values())
    if dead:
        problems.append(f"{dead} outbox message(s) dead after repeated failures (bloomline outbox status)")
    return {"ok": not problems, "problems": problems, "checked_utc": now.isoformat(), "jobs": jobs,
            "feeds": feeds, "scheduler": scheduler, "outbox": box}
