"""``bloomline demo``: the invented scenario's whole season, end to end.

The demo copies ``sample_feeds/`` into a working folder (the CSV feeds are
drop folders there, so nothing in the checkout is moved), writes the config
and an SQLite database beside them, ingests every feed file, then steps a
simulated clock through the season: each day it runs the cycle for every
water body exactly as the scheduled service would, and sends the day's
alert emails into a mailbox folder. It ends with a summary.
"""

from __future__ import annotations

import collections
import datetime as dt
import re
import shutil
import sys
from pathlib import Path

import click
import pandas as pd
from sqlalchemy import func, select

from monitor.alerting.caution import CAUTION
from monitor.alerting.frameworks import FRAMEWORKS
from monitor.alerting.levels import level_label
from monitor.app.service import Service
from monitor.config import Config, load_config
from monitor.ingest.feeds.csv_folder import feed_files
from monitor.store import schema
from monitor.store.readings import ingest_summary
from monitor.timeutil import UTC, as_utc

SAMPLE_FEEDS = Path(__file__).resolve().parents[2] / "sample_feeds"
FEED_FOLDERS = ("buoys", "lab", "inflows", "weather")
DEMO_OUTPUTS = ("bloomline.toml", "bloomline.sqlite", "bloomline.sqlite-wal", "bloomline.sqlite-shm",
                "feeds", "archive", "mailbox")


class Clock:
    """The demo's simulated clock (injected into the service)."""

    def __init__(self, now: dt.datetime):
        self.now = now

    def __call__(self) -> dt.datetime:
        return self.now


def prepare_workdir(workdir: Path, feeds: Path) -> Path:
    """Lay out a fresh demo folder; returns the config path. Removes only the demo's own files."""
    if not (feeds / "bloomline.toml").is_file():
        raise click.ClickException(f"{feeds} has no bloomline.toml: is it Bloomline's sample_feeds folder?")
    workdir.mkdir(parents=True, exist_ok=True)
    for name in DEMO_OUTPUTS:
        target = workdir / name
        if target.is_dir():
            shutil.rmtree(target)
        elif target.exists():
            target.unlink()
    for folder in FEED_FOLDERS:
        if (feeds / folder).is_dir():
            shutil.copytree(feeds / folder, workdir / "feeds" / folder)
    shutil.copyfile(feeds / "bloomline.toml", workdir / "bloomline.toml")
    return workdir / "bloomline.toml"


def set_base_url(config_path: Path, base_url: str) -> None:
    """Point the demo config's ``[service] base_url`` (the links in emails and webhooks) at the served port."""
    text = config_path.read_text(encoding="utf-8")
    line = f'base_url = "{base_url}"'
    new, n = re.subn(r'(?m)^base_url\s*=\s*"[^"]*"', line, text, count=1)
    if n == 0:
        new, n = re.subn(r"(?m)^\[service\]\s*$", "[service]\n" + line, text, count=1)
    if n == 0:
        raise click.ClickException(f"{config_path} has no [service] table to set base_url in")
    config_path.write_text(new, encoding="utf-8")


def season_days(engine) -> list[dt.datetime]:
    """Daily analysis times (00:00 UTC) from the day after the first buoy reading to the last."""
    r = schema.readings
    with engine.connect() as conn:
        first, last = conn.execute(select(func.min(r.c.time_utc), func.max(r.c.time_utc))
                                   .where(r.c.variable == "chlorophyll_fluorescence")).one()
    if first is None:
        raise click.ClickException("the demo feeds hold no chlorophyll readings")
    first, last = as_utc(first), as_utc(last)
    start = dt.datetime(first.year, first.month, first.day, tzinfo=UTC) + dt.timedelta(days=1)
    end = dt.datetime(last.year, last.month, last.day, tzinfo=UTC) + dt.timedelta(days=1)
    return list(pd.date_range(start, end, freq="1D").to_pydatetime())


def _progress(iterable, label: str, quiet: bool, length: int | None = None):
    if quiet:
        return _NullBar(iterable)
    return click.progressbar(iterable, label=label, length=length, file=sys.stderr, show_pos=True)


class _NullBar:
    """A progress bar that shows nothing (for ``--json``)."""

    def __init__(self, iterable):
        self.iterable = iterable if iterable is not None else ()

    def __enter__(self):
        return self

    def __iter__(self):
        return iter(self.iterable)

    def __exit__(self, *exc):
        return False

    def update(self, n):
        pass


def run_demo(workdir: Path, *, feeds: Path | None = None, quiet: bool = False,
             port: int = 8050) -> tuple[dict, Config]:
    """Run the demo season in ``workdir``; returns (summary, config)."""
    feeds = feeds or SAMPLE_FEEDS
    say = (lambda *a, **k: None) if quiet else (lambda msg: click.echo(msg, err=True))
    config_path = prepare_workdir(workdir.resolve(), feeds.resolve())
    set_base_url(config_path, f"http://127.0.0.1:{port}")
    config = load_config(config_path)
    say(f"Demo folder: {workdir.resolve()}")
    # The season's files are loaded first, as an archive received after the season
    # (so no reading lies in the future); the cycles then replay the season day by
    # day and read only what was there at each analysis time.
    clock = Clock(dt.datetime(2026, 11, 2, tzinfo=UTC))
    service = Service(config, clock=clock, replay=True)
    try:
        files = [p for fd in config.feeds if fd.kind == "csv-folder" for p in feed_files(fd)]
        with _progress(None, "Ingesting feeds", quiet, length=len(files)) as bar:
            results = service.ingest(progress=lambda i, n, result: bar.update(1))
        counts = ingest_summary(service.engine)
        say(f"Ingested {counts['accepted']} readings from {len(results)} files; "
            f"{counts['rejected']} rows rejected, {counts['duplicate']} duplicates.")
        days = season_days(service.engine)
        statuses: collections.Counter = collections.Counter()
        with _progress(days, "Assimilating and forecasting", quiet) as bar:
            for day in bar:
                clock.now = day
                for summary in service.run_cycles(day, season_start=days[0] - dt.timedelta(days=1)):
                    statuses[summary["status"]] += 1
                service.send_mail()
        summary = build_summary(service, config, results, days, statuses, port)
    finally:
        service.close()
    if not quiet:
        print_summary(summary)
    return summary, config


def build_summary(service: Service, config: Config, results, days, statuses, port: int) -> dict:
    engine = service.engine
    counts = ingest_summary(engine)
    with engine.connect() as conn:
        status = {(r.water_body_id, r.basin_id): r for r in conn.execute(select(schema.alert_status))}
        events = conn.execute(select(schema.alert_events).order_by(schema.alert_events.c.time_utc,
                                                                   schema.alert_events.c.id)).all()
        outbox = dict(conn.execute(select(schema.outbox.c.status, func.count())
                                   .group_by(schema.outbox.c.status)).all())
    bodies = []
    for wb in config.water_bodies:
        fw = FRAMEWORKS.get(wb.alerts.framework)
        basins = []
        for b in wb.basins:
            st = status.get((wb.id, b.id))
            level = int(st.level) if st else 0
            basins.append({"id": b.id, "name": b.name, "level": level,
                           "level_name": level_label(wb, level),
                           "since_utc": st.since_utc.isoformat() if st else None})
        bodies.append({"id": wb.id, "name": wb.name, "use": wb.use, "framework": wb.alerts.framework,
                       "framework_title": fw.title if fw else "custom levels",
                       "levels": [{"level": lv.number, "name": lv.name, "chlorophyll_ugL": lv.chlorophyll_ugL}
                                  for lv in wb.alerts.levels],
                       "basins": basins})
    changes = []
    for e in events:
        wb = config.water_body(e.water_body_id)
        changes.append({"water_body": e.water_body_id, "basin": e.basin_id, "time_utc": e.time_utc.isoformat(),
                        "from_level": int(e.from_level), "to_level": int(e.to_level),
                        "level_name": level_label(wb, int(e.to_level)),
                        "probability": e.probability, "observed_ugL": e.observed_ugL})
    return {
        "workdir": str(config.path.parent) if config.path else None,
        "database": config.service.database_url,
        "season": {"first_analysis_utc": days[0].isoformat(), "last_analysis_utc": days[-1].isoformat(),
                   "days": len(days)},
        "files": len(results),
        "readings": {k: counts[k] for k in ("received", "accepted", "flagged", "rejected", "duplicate")},
        "top_rejection_reasons": [{"reason": r, "rows": n} for r, n in counts["top_reasons"]],
        "cycles": dict(statuses),
        "water_bodies": bodies,
        "alert_changes": changes,
        "emails": {"sent": outbox.get("sent", 0), "pending": outbox.get("pending", 0),
                   "dead": outbox.get("dead", 0),
                   "mailbox": str(config.service.mailbox_dir) if config.service.mailbox_dir else None},
        "status_page": f"http://127.0.0.1:{port}/",
        "caution": CAUTION,
    }


def print_summary(s: dict) -> None:
    echo = click.echo
    r = s["readings"]
    echo("")
    echo(f"Season {s['season']['first_analysis_utc'][:10]} to {s['season']['last_analysis_utc'][:10]}: "
         f"{s['season']['days']} daily cycles per water body ({', '.join(f'{k} {v}' for k, v in s['cycles'].items())}).")
    echo(f"Readings: {r['received']} received, {r['accepted']} accepted ({r['flagged']} QC-flagged), "
         f"{r['rejected']} rejected, {r['duplicate']} duplicates.")
    if s["top_rejection_reasons"]:
        echo("Top rejection reasons:")
        for item in s["top_rejection_reasons"][:5]:
            echo(f"  {item['rows']:6d}  {item['reason']}")
    echo("")
    for wb in s["water_bodies"]:
        echo(f"{wb['name']} ({wb['use']}; {wb['framework_title']})")
        for b in wb["basins"]:
            since = f" since {b['since_utc'][:10]}" if b["since_utc"] and b["level"] else ""
            echo(f"  {b['name']:<16} {b['level_name']}{since}")
    echo("")
    echo("Alert changes:")
    if not s["alert_changes"]:
        echo("  none")
    for c in s["alert_changes"]:
        p = f"p={c['probability']:.2f}" if c["probability"] is not None else ""
        o = f"observed {c['observed_ugL']:.1f} µg/L" if c["observed_ugL"] is not None else ""
        echo(f"  {c['time_utc'][:10]}  {c['water_body']}/{c['basin']}: level {c['from_level']} → {c['to_level']} "
             f"({c['level_name']}) {p} {o}".rstrip())
    e = s["emails"]
    echo(f"Emails: {e['sent']} sent to {e['mailbox']}, {e['pending']} pending.")
    echo("")
    echo(s["caution"])
