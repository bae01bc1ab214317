"""``bloomline hindcast``: replay a stored history as if live and score every forecast.

1. :func:`monitor.verification.replay.replay` runs the service's daily cycle
   at each analysis time in a scratch copy of the store (the live store is
   never written).
   Every run stores Bloomline's members and the baselines issued with it.
2. :func:`monitor.verification.pairs.water_body_pairs` pairs each issued run
   and its baselines with the QC-passed observations of the live store that
   came later.
3. :mod:`monitor.verification.summary` scores them by lead day, and
   :mod:`monitor.verification.warnings` finds each first crossing of an
   alert level and how long the warning stood before it.
"""

from __future__ import annotations

import datetime as dt
import shutil
import tempfile
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import pandas as pd
from sqlalchemy import func, select
from sqlalchemy.engine import Engine

from monitor.config import Config
from monitor.store import schema
from monitor.timeutil import UTC
from monitor.verification import summary
from monitor.verification.pairs import Pairs, water_body_pairs
from monitor.verification.records import pair_records
from monitor.verification.replay import analysis_days, replay
from monitor.verification.warnings import warning_table


@dataclass
class HindcastResult:
    """Everything a hindcast measured (tables are pandas DataFrames)."""

    days: list[dt.datetime]
    pairs: Pairs
    records: pd.DataFrame
    by_lead: pd.DataFrame
    by_basin: pd.DataFrame
    skill_by_lead: pd.DataFrame
    warnings: pd.DataFrame
    #: the alert level in force after each replayed cycle: analysis_utc, water_body, basin_id, level
    levels: pd.DataFrame
    statuses: dict[str, int]
    seconds: float


def default_days(engine: Engine, config: Config, only: list[str] | None, cycle_at: dt.time,
                 first: dt.date | None = None, last: dt.date | None = None) -> list[dt.datetime]:
    """Daily analysis times at ``cycle_at`` (UTC): from the day after the first basin reading to
    the day after the last, or within [first, last] when given."""
    stations = [s.id for s in config.stations if s.basin and (only is None or s.water_body in only)]
    r = schema.readings
    with engine.connect() as conn:
        lo, hi = conn.execute(select(func.min(r.c.time_utc), func.max(r.c.time_utc))
                              .where(r.c.station_id.in_(stations))).one()
    if lo is None:
        return []
    start = first or (lo.date() + dt.timedelta(days=1))
    end = last or (hi.date() + dt.timedelta(days=1))
    return analysis_days(dt.datetime.combine(start, cycle_at, tzinfo=UTC),
                         dt.datetime.combine(end, cycle_at, tzinfo=UTC))


def run_hindcast(config: Config, engine: Engine, days: list[dt.datetime], *, only: list[str] | None = None,
                 progress: Callable[[str, int], None] | None = None, keep_folder: Path | None = None
                 ) -> HindcastResult:
    """Replay ``days`` for the water bodies ``only`` (default all) and score what was issued.

    ``progress(stage, n)`` is called as the replay and the scoring advance.
    ``keep_folder``: where to keep the scratch store (deleted afterwards otherwise).
    """
    if not days:
        raise ValueError("no analysis days to replay: the store holds no readings in the range")
    started = time.perf_counter()
    bodies = [wb for wb in config.water_bodies if only is None or wb.id in only]
    folder = Path(keep_folder) if keep_folder else Path(tempfile.mkdtemp(prefix="bloomline-hindcast-"))
    folder.mkdir(parents=True, exist_ok=True)
    try:
        scratch, replayed = replay(config, engine, days, only=[wb.id for wb in bodies], folder=folder,
                                   progress=(lambda _d: progress("replay", 1)) if progress else None)
        statuses: dict[str, int] = {}
        for day in replayed:
            for s in day.summaries:
                statuses[s["status"]] = statuses.get(s["status"], 0) + 1
        parts = [water_body_pairs(scratch, engine, config, wb,
                                  progress=(lambda: progress("score", 1)) if progress else None)
                 for wb in bodies]
        scratch.dispose()
    finally:
        if keep_folder is None:
            shutil.rmtree(folder, ignore_errors=True)
    pairs = Pairs.concat(parts)
    levels = {wb.id: tuple(lv.chlorophyll_ugL for lv in wb.alerts.levels) for wb in bodies}
    warn = {wb.id: wb.alerts.warn_probability for wb in bodies}
    records = pair_records(pairs, levels)
    return HindcastResult(
        days=days, pairs=pairs, records=records,
        by_lead=summary.score_table(records, ["quantity", "lead_days"]),
        by_basin=summary.score_table(records, ["water_body", "basin_id", "quantity", "lead_days"], levels, warn),
        skill_by_lead=summary.skill_table(records, ["quantity", "lead_days"]),
        warnings=warning_table(bodies, replayed, pairs.observed, pairs.outlooks),
        levels=pd.DataFrame([(d.analysis, wb, basin, lv) for d in replayed for (wb, basin), lv in d.levels.items()],
                            columns=["analysis_utc", "water_body", "basin_id", "level"]),
        statuses=statuses, seconds=time.perf_counter() - started)
