"""The demo reservoir's state after a handful of daily cycles, in a temporary folder.

The invented scenario of ``sample_feeds/`` is ingested into a fresh store and Corrisdale
Reservoir is run for ``cycles`` daily cycles up to ``last`` (2026-08-20 by default, when the
Fennick Arm nears Alert Level 2 in the scenario's truth; sample_feeds/README.md).
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

from monitor.alerting.transports import MailboxTransport
from monitor.app.demo import SAMPLE_FEEDS, Clock, prepare_workdir
from monitor.app.service import Service
from monitor.config import load_config

LAST_ANALYSIS = dt.datetime(2026, 8, 20, tzinfo=dt.UTC)


def demo_state(workdir: Path, cycles: int = 7, last: dt.datetime = LAST_ANALYSIS) -> Service:
    """The service over the demo's store with ``cycles`` cycles of Corrisdale Reservoir to ``last``."""
    config = load_config(prepare_workdir(workdir, SAMPLE_FEEDS))
    clock = Clock(last)
    service = Service(config, clock=clock, transport=MailboxTransport(workdir / "mailbox"))
    service.ingest()
    first = last - dt.timedelta(days=cycles - 1)
    for k in range(cycles):
        clock.now = first + dt.timedelta(days=k)
        service.run_cycles(clock.now, only=["corrisdale"], season_start=first - dt.timedelta(days=1))
    return service
