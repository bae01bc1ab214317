"""A store of the demo scenario with a few days of forecast cycles, for browser tests and the benchmark.

The demo's feeds (the invented Corrisdale Reservoir and Sorrel Lake) are
ingested whole, then the service runs its daily cycle for a few days in the
bloom, exactly as the demo does, with the alert rules' spin-up shortened so
that alert levels appear within those days. The whole season's cycles are
the demo's job (``bloomline demo``); a few days are enough to show every
page element.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from pathlib import Path

from monitor.app.demo import SAMPLE_FEEDS, Clock, prepare_workdir
from monitor.app.service import Service
from monitor.config import Config, load_config

#: The first analysis of the cycles run, and how many days of them.
FIRST_DAY = dt.datetime(2026, 8, 4, tzinfo=dt.UTC)
DAYS = 6


def build_demo_store(workdir: Path, *, first_day: dt.datetime = FIRST_DAY, days: int = DAYS,
                     spin_up_cycles: int = 2) -> tuple[Config, dt.datetime]:
    """Lay out the demo in ``workdir``, ingest its feeds and run ``days`` daily cycles from
    ``first_day``; returns (config, the time just after the last analysis)."""
    config = load_config(prepare_workdir(workdir, SAMPLE_FEEDS))
    config = dataclasses.replace(config, filter=dataclasses.replace(config.filter, spin_up_cycles=spin_up_cycles))
    clock = Clock(dt.datetime(2026, 11, 2, tzinfo=dt.UTC))
    service = Service(config, clock=clock)
    try:
        service.ingest()
        season_start = first_day - dt.timedelta(days=2)  # a cold start just before: the first cycle stays short
        for k in range(days):
            day = first_day + dt.timedelta(days=k)
            clock.now = day
            service.run_cycles(day, season_start=season_start)
            service.send_mail()
    finally:
        service.close()
    return config, first_day + dt.timedelta(days=days - 1, hours=2)
