"""A season replay through the real service process, for the fault tests.

* :func:`replay_config` writes a config from the demo scenario's: SMTP and a
  webhook on loopback, a smaller ensemble, a short spin-up, the weather
  observations split by day.
* :class:`Dropper` splits the scenario's monthly feed files into one file
  per day and drops each into the feed folders when the service clock passes
  the end of that day (written to a hidden name and renamed, as a careful
  uploader would), so readings arrive while the service runs.
* :class:`ServiceProcess` runs ``bloomline run --no-web`` with a
  fast-forwarded clock (``--clock-start/--clock-speed/--clock-anchor``, the
  same for every restart, so service time goes on while a process is down)
  and reads its JSON log lines.
* :func:`consistency_problems` and :func:`reference_readings` are the checks.
"""

from __future__ import annotations

import datetime as dt
import json
import os
import re
import signal
import subprocess
import sys
import threading
import time
from collections import defaultdict
from pathlib import Path

from sqlalchemy import and_, func, select

from monitor.app.clock import ServiceClock
from monitor.config import load_config
from monitor.store import schema
from monitor.store.db import connect, open_store

ROOT = Path(__file__).resolve().parents[3]
SAMPLE = ROOT / "sample_feeds"
UTC = dt.UTC
DAY = dt.timedelta(days=1)
#: (scenario folder, its files, the drop folder under feeds/, the daily file's name)
SOURCES = [
    ("buoys/CR-FA", "*.csv", "buoys/CR-FA", "{day}.csv"),
    ("buoys/CR-MR", "*.csv", "buoys/CR-MR", "{day}.csv"),
    ("buoys/CR-DB", "*.csv", "buoys/CR-DB", "{day}.csv"),
    ("buoys/SL-01", "*.csv", "buoys/SL-01", "{day}.csv"),
    ("lab", "samples.csv", "lab", "samples-{day}.csv"),
    ("inflows", "daily.csv", "inflows", "daily-{day}.csv"),
    ("weather", "hourly.csv", "weather", "hourly-{day}.csv"),
    ("weather/forecasts", "*.csv", "weather/forecasts", "{day}.csv"),
]
_DATE = re.compile(r"^\d{4}-\d{2}-\d{2}")


def replay_config(folder: Path, *, database: str, smtp_port: int, webhook_url: str, webhook_secret: str,
                  lease_seconds: float = 3.0, members: int = 20) -> Path:
    """The demo scenario's config for a replay in ``folder``; returns its path."""
    text = (SAMPLE / "bloomline.toml").read_text()
    text = text.replace('database = "sqlite:///bloomline.sqlite"', f'database = "{database}"')
    text = text.replace('mailbox_dir = "mailbox"        # demo: emails are written here as .eml files, no SMTP needed\n',
                        "")
    text = text.replace('pattern = "hourly.csv"', 'pattern = "hourly-*.csv"')
    text = text.replace("[schedule]\n", f"[schedule]\nsend_every_minutes = 180\nlease_seconds = {lease_seconds}\n")
    text = text.replace("ingest_every_minutes = 15", "ingest_every_minutes = 240")
    text = text.replace('[smtp]\n', f'[smtp]\nhost = "127.0.0.1"\nport = {smtp_port}\ntimeout_s = 5\n')
    text = text.replace("[filter]\nmembers = 60", f"[filter]\nmembers = {members}\nspin_up_cycles = 3")
    text += (f'\n[[webhooks]]\nname = "utility"\nurl = "{webhook_url}"\nsecret = "{webhook_secret}"\n'
             f"timeout_s = 5\n")
    assert "mailbox_dir" not in text and "spin_up_cycles = 3" in text and "hourly-*.csv" in text
    path = folder / "bloomline.toml"
    path.write_text(text)
    return path


def _daily_lines(source: Path) -> dict[dt.date, list[str]]:
    """A feed file's data lines by the date their first field starts with (others stay with the line before)."""
    lines = source.read_text(encoding="utf-8").splitlines()
    out: dict[dt.date, list[str]] = defaultdict(list)
    day = None
    for line in lines[1:]:
        m = _DATE.match(line)
        if m:
            day = dt.date.fromisoformat(m.group(0))
        if day is not None:
            out[day].append(line)
    return out


class Dropper:
    """Drops the scenario's data day by day into ``folder/feeds`` as service time passes each day's end."""

    def __init__(self, folder: Path, clock: ServiceClock, first: dt.date, last: dt.date,
                 release_before_midnight: dt.timedelta = dt.timedelta(hours=2)):
        self.feeds = folder / "feeds"
        self.clock, self.first, self.last = clock, first, last
        self.lead = release_before_midnight
        self.files: dict[dt.date, list[tuple[Path, str]]] = defaultdict(list)
        for src_dir, pattern, dest_dir, name in SOURCES:
            for source in sorted((SAMPLE / src_dir).glob(pattern)):
                if not source.is_file():
                    continue
                header = source.read_text(encoding="utf-8").splitlines()[0]
                for day, lines in _daily_lines(source).items():
                    if first <= day <= last:
                        target = self.feeds / dest_dir / name.format(day=day.isoformat())
                        self.files[day].append((target, "\n".join([header, *lines]) + "\n"))
        self.released: set[dt.date] = set()
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None

    def release_time(self, day: dt.date) -> dt.datetime:
        return dt.datetime(day.year, day.month, day.day, tzinfo=UTC) + DAY - self.lead

    def drop_due(self) -> int:
        """Write every day's files whose time has come; returns how many days were dropped."""
        now, n = self.clock(), 0
        for day in sorted(self.files):
            if day in self.released or self.release_time(day) > now:
                continue
            for target, content in self.files[day]:
                target.parent.mkdir(parents=True, exist_ok=True)
                tmp = target.with_name("." + target.name + ".part")
                tmp.write_text(content, encoding="utf-8")
                os.replace(tmp, target)
            self.released.add(day)
            n += 1
        return n

    def start(self) -> Dropper:
        def loop():
            while not self._stop.wait(0.05):
                self.drop_due()
        self._thread = threading.Thread(target=loop, daemon=True)
        self._thread.start()
        return self

    def stop(self) -> None:
        self._stop.set()
        if self._thread is not None:
            self._thread.join(5)

    @property
    def done(self) -> bool:
        return self.released >= set(self.files)


class ServiceProcess:
    """``bloomline run --no-web`` in a child process with the replay clock; its JSON log events kept."""

    def __init__(self, config_path: Path, clock: ServiceClock, env: dict | None = None):
        self.events: list[dict] = []
        self.lines: list[str] = []
        self._cond = threading.Condition()
        args = [sys.executable, "-c", "from monitor.app.cli import main; main()", "run", "--no-web",
                "--config", str(config_path), "--clock-start", clock.start.isoformat(),
                "--clock-speed", repr(clock.speed), "--clock-anchor", repr(clock.anchor.timestamp())]
        self.proc = subprocess.Popen(args, cwd=ROOT, env=env or dict(os.environ), stdout=subprocess.DEVNULL,
                                     stderr=subprocess.PIPE, text=True)
        self._reader = threading.Thread(target=self._read, daemon=True)
        self._reader.start()

    def _read(self):
        for line in self.proc.stderr:
            with self._cond:
                self.lines.append(line)
                try:
                    self.events.append(json.loads(line))
                except ValueError:
                    pass
                self._cond.notify_all()

    def wait_for(self, event: str, timeout: float) -> dict | None:
        """The first log event named ``event`` (waiting up to ``timeout`` s), or None."""
        deadline = time.monotonic() + timeout
        with self._cond:
            while True:
                for e in self.events:
                    if e.get("event") == event:
                        return e
                left = deadline - time.monotonic()
                if left <= 0 or self.proc.poll() is not None and not self._reader.is_alive():
                    return None
                self._cond.wait(min(left, 0.2))

    def kill(self) -> None:
        os.kill(self.proc.pid, signal.SIGKILL)
        self.proc.wait(10)
        self._reader.join(5)

    def terminate(self, sig=signal.SIGTERM, timeout: float = 30.0) -> tuple[int, float]:
        """Send ``sig``; (exit code, seconds until the process ended)."""
        t0 = time.monotonic()
        self.proc.send_signal(sig)
        code = self.proc.wait(timeout)
        self._reader.join(5)
        return code, time.monotonic() - t0

    def close(self) -> None:
        if self.proc.poll() is None:
            self.proc.kill()
            self.proc.wait(10)
        self._reader.join(5)
        self.proc.stderr.close()

    def log_text(self) -> str:
        return "".join(self.lines)


# ---------------------------------------------------------------- checks


def consistency_problems(engine, config) -> list[str]:
    """What a crash must never leave visible: half-written runs, a published level behind the newest run,
    an alert event without its messages."""
    problems = []
    runs, vals, ckpt, st = schema.forecast_runs, schema.forecast_values, schema.checkpoints, schema.alert_status
    with engine.connect() as conn:
        n_values = dict(conn.execute(select(vals.c.run_id, func.count()).group_by(vals.c.run_id)).all())
        checkpoints = set(conn.execute(select(ckpt.c.water_body_id, ckpt.c.time_utc)).all())
        all_runs = conn.execute(select(runs).order_by(runs.c.analysis_utc)).all()
        status = conn.execute(select(st)).all()
        events = conn.execute(select(schema.alert_events)).all()
        queued = dict(conn.execute(select(schema.outbox.c.event_id, func.count()).where(
            schema.outbox.c.event_id.is_not(None)).group_by(schema.outbox.c.event_id)).all())
        subs = conn.execute(select(schema.subscribers).where(schema.subscribers.c.active == 1)).all()
    for wb in config.water_bodies:
        mine = [r for r in all_runs if r.water_body_id == wb.id]
        full = {n_values.get(r.id, 0) for r in mine if r.status != "failed"}
        if len(full) > 1:
            problems.append(f"{wb.id}: runs with different numbers of forecast values {sorted(full)}")
        for r in mine:
            if r.status != "failed" and (wb.id, r.analysis_utc) not in checkpoints:
                problems.append(f"{wb.id}: run at {r.analysis_utc} without its checkpoint")
            if r.status != "failed" and not n_values.get(r.id):
                problems.append(f"{wb.id}: run at {r.analysis_utc} without its forecast values")
        times = {r.analysis_utc for r in mine}
        for w, t in checkpoints:
            if w == wb.id and t not in times:
                problems.append(f"{wb.id}: checkpoint at {t} without its run")
        with_values = [r for r in mine if n_values.get(r.id)]
        if with_values:
            newest = with_values[-1]
            warm = sum(1 for r in mine if r.analysis_utc < newest.analysis_utc) >= config.filter.spin_up_cycles
            published = {s.updated_utc for s in status if s.water_body_id == wb.id}
            if warm and published != {newest.analysis_utc}:
                problems.append(f"{wb.id}: published level from {sorted(published)}, newest run {newest.analysis_utc}")
    hooks = {h.name: h for h in config.webhooks}
    for e in events:
        level = max(e.from_level, e.to_level)
        want = sum(1 for s in subs if s.water_body_id == e.water_body_id and s.min_level <= level)
        want += sum(1 for h in hooks.values() if h.wants(e.water_body_id, "alert") and h.min_level <= level)
        if queued.get(e.id, 0) != want:
            problems.append(f"alert event {e.id} has {queued.get(e.id, 0)} outbox rows, expected {want}")
    return problems


def readings_set(engine) -> set[tuple]:
    r = schema.readings
    with engine.connect() as conn:
        return set(conn.execute(select(r.c.station_id, r.c.variable, r.c.time_utc, r.c.source, r.c.value)).all())


def reference_readings(folder: Path, config_path: Path) -> set[tuple]:
    """The same dropped files ingested at once into a fresh store, in this process."""
    from monitor.ingest.feeds.csv_folder import ingest_all

    config = load_config(config_path)
    ref = folder / "reference"
    ref.mkdir()
    engine = open_store(f"sqlite:///{ref / 'ref.sqlite'}")
    from dataclasses import replace

    config = replace(config, service=replace(config.service, archive_dir=ref / "archive"))
    ingest_all(engine, config)
    out = readings_set(engine)
    engine.dispose()
    return out


def open_engine(url: str, env_options: str | None = None):
    if env_options:
        from sqlalchemy import create_engine

        return create_engine(url, connect_args={"options": env_options})
    return connect(url)


def cycle_runs_by_owner(engine) -> dict[tuple[str, dt.datetime], list[tuple[str, str]]]:
    """(water body, analysis time) → [(owner, outcome)] of the recorded cycle job runs."""
    jr = schema.job_runs
    out: dict = defaultdict(list)
    with engine.connect() as conn:
        for wb, t, owner, outcome in conn.execute(select(jr.c.water_body_id, jr.c.scheduled_utc, jr.c.owner,
                                                         jr.c.outcome).where(and_(jr.c.job == "cycle"))):
            out[(wb, t)].append((owner, outcome))
    return out
