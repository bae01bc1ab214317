"""Operations commands: ``bloomline health``, ``outbox status|requeue``, ``prune`` and ``backup``.

``health`` exits 1 when something is wrong (a job failing repeatedly, a
stale feed, a silent scheduler, dead messages), for external monitoring.
"""

from __future__ import annotations

import datetime as dt
import json
from pathlib import Path

import click

from monitor.config import ConfigError, load_config
from monitor.timeutil import now_utc

config_option = click.option("--config", "config_path", envvar="BLOOMLINE_CONFIG", required=True,
                             type=click.Path(dir_okay=False), help="Bloomline TOML file (or $BLOOMLINE_CONFIG).")


def _open(config_path: str):
    from monitor.store.db import open_store

    try:
        config = load_config(config_path)
    except ConfigError as exc:
        raise click.ClickException(f"configuration error: {exc}") from None
    return config, open_store(config.service.database_url)


@click.command()
@config_option
@click.option("--max-failures", default=3, show_default=True, type=click.IntRange(min=1),
              help="A job is failing when its last N runs all failed.")
@click.option("--stale-hours", default=24.0, show_default=True, type=click.FloatRange(min=0, min_open=True),
              help="A feed is stale with no stored data for this long [h].")
@click.option("--json", "as_json", is_flag=True, help="Print the whole report as one JSON object.")
def health(config_path: str, max_failures: int, stale_hours: float, as_json: bool) -> None:
    """Check the service: exit 0 when healthy, 1 when a job fails repeatedly, a feed is stale,
    the scheduler is silent or messages are dead."""
    from monitor.store.health import health_report

    config, engine = _open(config_path)
    now = now_utc()
    report = health_report(engine, config, now=now, max_failures=max_failures,
                           stale_after=dt.timedelta(hours=stale_hours))
    if as_json:
        click.echo(json.dumps(report, default=str))
    else:
        click.echo("healthy" if report["ok"] else "UNHEALTHY")
        for problem in report["problems"]:
            click.echo(f"  - {problem}")
        s = report["scheduler"]
        if s is not None:
            click.echo(f"scheduler: {s['holder']} (term {s['term']}), heartbeat {s['heartbeat_age_s']:.0f} s ago"
                       + (", released" if s["released"] else ""))
    engine.dispose()
    raise SystemExit(0 if report["ok"] else 1)


@click.group()
def outbox() -> None:
    """Look at and repair the outbox of emails and webhook calls."""


@outbox.command("status")
@config_option
@click.option("--json", "as_json", is_flag=True, help="Print as one JSON object.")
def outbox_status_cmd(config_path: str, as_json: bool) -> None:
    """Counts per channel and status, the oldest waiting message, and the dead messages with their errors."""
    from monitor.alerting.outbox import outbox_status

    _config, engine = _open(config_path)
    status = outbox_status(engine, now_utc())
    engine.dispose()
    if as_json:
        click.echo(json.dumps(status, default=str))
        return
    for channel, counts in sorted(status["counts"].items()):
        click.echo(f"{channel}: " + ", ".join(f"{n} {s}" for s, n in sorted(counts.items())))
    if status["oldest_pending_age_s"] is not None:
        click.echo(f"oldest pending: {status['oldest_pending_age_s'] / 60:.0f} min")
    for d in status["dead"]:
        click.echo(f"dead #{d['id']} {d['channel']} to {d['recipient']} after {d['attempts']} attempts: {d['last_error']}")


@outbox.command("requeue")
@config_option
@click.option("--id", "ids", multiple=True, type=click.IntRange(min=1), help="Only this message (repeatable).")
@click.option("--all-dead", is_flag=True, help="Every dead message.")
def outbox_requeue(config_path: str, ids: tuple[int, ...], all_dead: bool) -> None:
    """Give dead messages a fresh set of attempts (same idempotency key), due now."""
    from monitor.alerting.outbox import requeue

    if not ids and not all_dead:
        raise click.UsageError("name messages with --id N, or give --all-dead")
    _config, engine = _open(config_path)
    n = requeue(engine, now_utc(), list(ids) if ids else None)
    engine.dispose()
    click.echo(f"{n} message(s) requeued")


@click.command()
@config_option
@click.option("--checkpoints-keep", default=None, type=click.IntRange(min=1),
              help="Keep the newest N checkpoints of each water body.")
@click.option("--archive-days", default=None, type=click.IntRange(min=1),
              help="Delete archived raw payloads older than N days.")
@click.option("--job-runs-days", default=None, type=click.IntRange(min=1), help="Delete job records older than N days.")
@click.option("--dry-run", is_flag=True, help="Count what would go; delete nothing.")
def prune(config_path: str, checkpoints_keep: int | None, archive_days: int | None, job_runs_days: int | None,
          dry_run: bool) -> None:
    """Delete old checkpoints, archived raw payloads and job records (readings and runs stay)."""
    from monitor.store import jobs, maintenance, runs

    if checkpoints_keep is None and archive_days is None and job_runs_days is None:
        raise click.UsageError("say what to prune: --checkpoints-keep, --archive-days and/or --job-runs-days")
    if dry_run and (checkpoints_keep is not None or job_runs_days is not None):
        raise click.UsageError("--dry-run counts archive files only; run it with --archive-days alone")
    config, engine = _open(config_path)
    now = now_utc()
    out = {}
    if checkpoints_keep is not None:
        out["checkpoints"] = {wb.id: runs.prune_checkpoints(engine, wb.id, keep=checkpoints_keep)
                              for wb in config.water_bodies}
    if archive_days is not None:
        out["archive"] = maintenance.prune_archive(engine, config.service.archive_dir,
                                                   before=now - dt.timedelta(days=archive_days), dry_run=dry_run)
    if job_runs_days is not None:
        out["job_runs"] = jobs.prune_job_runs(engine, before=now - dt.timedelta(days=job_runs_days))
    engine.dispose()
    click.echo(json.dumps(out))


@click.command()
@config_option
@click.argument("dest", type=click.Path(dir_okay=False, writable=True))
def backup(config_path: str, dest: str) -> None:
    """Copy the SQLite store to DEST while the service runs (a consistent snapshot)."""
    from monitor.store.maintenance import backup_sqlite

    _config, engine = _open(config_path)
    try:
        size = backup_sqlite(engine, Path(dest))
    except (ValueError, FileExistsError) as exc:
        raise click.ClickException(str(exc)) from None
    finally:
        engine.dispose()
    click.echo(f"backup written to {dest} ({size} bytes)")
