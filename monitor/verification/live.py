"""The live verification record: each issued run scored as its observations arrive.

After every cycle the service scores the runs of the water body whose lead
days have ended since the horizon began (:func:`score_recent`): pairs of the
stored members of Bloomline and of the baselines with the QC-passed daily
means of the readings now in the store, one score record per pair and
forecaster (:mod:`monitor.verification.records`), written in place of the
earlier records of the same runs. The same call twice writes the same rows
(idempotent); a reading that arrives later than the horizon plus
``RESCORE_DAYS`` is not taken into the record (a hindcast scores it).
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
from sqlalchemy import delete, insert, select
from sqlalchemy.engine import Engine

from monitor.config import Config, WaterBodyConfig
from monitor.store import schema
from monitor.store.availability import Availability
from monitor.verification import summary
from monitor.verification.pairs import water_body_pairs
from monitor.verification.records import RECORD_COLUMNS, pair_records

#: Days after a run's horizon during which its scores are refreshed as late readings arrive.
RESCORE_DAYS = 2


def levels_of(wb: WaterBodyConfig) -> dict[str, tuple[float, ...]]:
    return {wb.id: tuple(lv.chlorophyll_ugL for lv in wb.alerts.levels)}


def score_recent(engine: Engine, config: Config, wb: WaterBodyConfig, analysis: dt.datetime,
                 *, available: Availability | None = None) -> int:
    """Score ``wb``'s runs issued in the last horizon + ``RESCORE_DAYS`` days against the readings up to
    ``analysis`` (in a replay, ``available``: those available by then); returns the number of records written."""
    first = analysis - dt.timedelta(days=wb.alerts.horizon_days + RESCORE_DAYS)
    pairs = water_body_pairs(engine, engine, config, wb, first=first, last=analysis, until=analysis,
                             available=available)
    records = pair_records(pairs, levels_of(wb))
    t = schema.forecast_scores
    runs = schema.forecast_runs
    with engine.begin() as conn:
        ids = [r for (r,) in conn.execute(select(runs.c.id).where(
            (runs.c.water_body_id == wb.id) & (runs.c.analysis_utc >= first) & (runs.c.analysis_utc <= analysis)))]
        if ids:
            conn.execute(delete(t).where(t.c.run_id.in_(ids)))
        if len(records):
            conn.execute(insert(t), _rows(records))
    return len(records)


def _rows(records: pd.DataFrame) -> list[dict]:
    frame = records.rename(columns={"water_body": "water_body_id"})
    rows = []
    for rec in frame.to_dict(orient="records"):
        row = {}
        for k, v in rec.items():
            if isinstance(v, (float, np.floating)):
                v = None if not np.isfinite(v) else float(v)
            elif isinstance(v, np.integer):
                v = int(v)
            elif isinstance(v, pd.Timestamp):
                v = v.to_pydatetime()
            row[k] = v
        rows.append(row)
    return rows


def stored_records(engine: Engine, water_body_id: str, since: dt.datetime | None = None,
                   forecasters: tuple[str, ...] | None = None) -> pd.DataFrame:
    """The stored score records of a water body (valid on or after ``since``; of ``forecasters`` only
    when given), as ``RECORD_COLUMNS``."""
    t = schema.forecast_scores
    q = select(t).where(t.c.water_body_id == water_body_id)
    if since is not None:
        q = q.where(t.c.valid_utc >= since)
    if forecasters is not None:
        q = q.where(t.c.forecaster.in_(forecasters))
    with engine.connect() as conn:
        frame = pd.DataFrame(conn.execute(q).mappings().all())
    if frame.empty:
        return pd.DataFrame(columns=RECORD_COLUMNS)
    frame = frame.rename(columns={"water_body_id": "water_body"})
    for col in ("origin_utc", "valid_utc"):
        frame[col] = pd.to_datetime(frame[col], utc=True)
    return frame[RECORD_COLUMNS]


def record_summary(engine: Engine, wb: WaterBodyConfig, since: dt.datetime | None = None) -> dict:
    """The water body's verified record: scores and skill by lead per quantity, Bloomline's rank
    histogram and reliability per level, as plain tables."""
    records = stored_records(engine, wb.id, since)
    levels = levels_of(wb)
    return {
        "records": records,
        "by_lead": summary.score_table(records, ["quantity", "lead_days"], levels,
                                       {wb.id: wb.alerts.warn_probability}),
        "skill_by_lead": summary.skill_table(records, ["quantity", "lead_days"]),
        "rank_histogram": summary.rank_histogram(records),
    }


def latest_blend(engine: Engine, water_body_id: str) -> dict | None:
    """The blend settings (component weights, bias, spread factor per quantity and lead) of the
    water body's newest run that has them, with that run's analysis time; None before any."""
    t = schema.forecast_runs
    q = (select(t.c.analysis_utc, t.c.diagnostics).where(t.c.water_body_id == water_body_id)
         .order_by(t.c.analysis_utc.desc()).limit(5))
    with engine.connect() as conn:
        for analysis, diagnostics in conn.execute(q):
            blend = (diagnostics or {}).get("blend")
            if blend and blend.get("by_quantity"):
                return {"analysis_utc": analysis, **blend}
    return None
