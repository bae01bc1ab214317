"""Queries over stored readings, ingest batches, rejected rows and weather forecasts.

Times come back as tz-aware UTC pandas timestamps; values in canonical
units (:mod:`monitor.ingest.variables`); QC flags as in QARTOD (1 pass,
2 not evaluated, 3 suspect, 4 fail, 9 missing).
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Iterable

import numpy as np
import pandas as pd
from sqlalchemy import String, and_, case, func, or_, select, type_coerce
from sqlalchemy.engine import Engine

from monitor.store.availability import Availability
from monitor.store.schema import driver_forecasts, ingest_batches, readings, rejected_rows
from monitor.timeutil import aware_utc, utc_from_db, utc_series_from_db


def readings_frame(engine: Engine, *, stations: Iterable[str] | None = None,
                   variables: Iterable[str] | None = None, start=None, end=None,
                   max_flag: int = 1, include_censored: bool = False,
                   available: Availability | None = None) -> pd.DataFrame:
    """Stored readings with ``qc_flag <= max_flag`` (1: passed only; 3: with suspect; 9: everything).

    start and end [aware datetimes] bound ``time_utc`` inclusively. Columns
    station_id, variable, time_utc (tz-aware UTC), value, qc_flag, source;
    sorted by time (then station, variable, source).

    Censored readings (below a detection limit: no value, QC flag 9) are left
    out, so ``value`` is always a plain number or NaN for a missing reading.
    With ``include_censored`` they are in (whatever ``max_flag``), with NaN
    as their value, and two more columns say what they mean: ``censored``
    (bool) and ``detection_limit`` (the limit in the canonical unit, NaN
    when unknown or not censored) — "below this" information.
    ``available``: only the readings available then (a replay's reporting delays).
    """
    start = aware_utc(start, "start")
    end = aware_utc(end, "end")
    flag_ok = readings.c.qc_flag <= int(max_flag)
    cond = [or_(flag_ok, readings.c.censored != 0) if include_censored else and_(flag_ok, readings.c.censored == 0)]
    if stations is not None:
        cond.append(readings.c.station_id.in_(list(stations)))
    if variables is not None:
        cond.append(readings.c.variable.in_(list(variables)))
    if start is not None:
        cond.append(readings.c.time_utc >= start)
    if end is not None:
        cond.append(readings.c.time_utc <= end)
    if available is not None:
        cond.append(available.condition(readings.c.station_id, readings.c.time_utc))
    extra = [readings.c.censored, readings.c.detection_limit] if include_censored else []
    q = (select(readings.c.station_id, readings.c.variable, type_coerce(readings.c.time_utc, String),
                readings.c.value,
                readings.c.qc_flag, readings.c.source, readings.c.whole_day, *extra)
         .where(and_(*cond))
         .order_by(readings.c.time_utc, readings.c.station_id, readings.c.variable, readings.c.source))
    with engine.connect() as conn:
        # the raw driver rows: no column here needs SQLAlchemy's result processing (the time is
        # read as text in SQLite and converted below, vectorised), and skipping it is 2× faster
        rows = conn.execute(q).cursor.fetchall()
    if not rows:
        frame = pd.DataFrame({"station_id": pd.Series([], dtype=object), "variable": pd.Series([], dtype=object),
                              "time_utc": pd.Series([], dtype="datetime64[ns, UTC]"),
                              "value": pd.Series([], dtype=float), "qc_flag": pd.Series([], dtype=np.int64),
                              "source": pd.Series([], dtype=object), "whole_day": pd.Series([], dtype=bool)})
        if include_censored:
            frame["censored"] = pd.Series([], dtype=bool)
            frame["detection_limit"] = pd.Series([], dtype=float)
        return frame
    cols = list(zip(*rows))
    st, var, t, v, f, src, wd = cols[:7]
    frame = pd.DataFrame({"station_id": list(st), "variable": list(var), "time_utc": utc_series_from_db(t),
                          "value": _floats(v), "qc_flag": np.asarray(f, dtype=np.int64), "source": list(src),
                          "whole_day": np.asarray(wd, dtype=np.int64) != 0})
    if include_censored:
        frame["censored"] = np.asarray(cols[7], dtype=np.int64) != 0
        frame["detection_limit"] = _floats(cols[8])
    return frame


def _floats(column) -> np.ndarray:
    """Database floats (None = NULL) → a float array with NaN for NULL."""
    return np.array([np.nan if x is None else x for x in column], dtype=float)


def latest_driver_forecast(engine: Engine, station_id: str, *, issued_at_or_before) -> pd.DataFrame:
    """The newest weather forecast of ``station_id`` issued at or before the given aware time.

    Columns variable, valid_utc (tz-aware UTC), value (canonical units),
    issued_utc; sorted by variable and valid time; empty if none.
    """
    limit = aware_utc(issued_at_or_before, "issued_at_or_before")
    with engine.connect() as conn:
        issued = conn.execute(select(func.max(driver_forecasts.c.issued_utc)).where(
            driver_forecasts.c.station_id == station_id, driver_forecasts.c.issued_utc <= limit)).scalar()
        if issued is None:
            return pd.DataFrame({"variable": pd.Series([], dtype=object),
                                 "valid_utc": pd.Series([], dtype="datetime64[ns, UTC]"),
                                 "value": pd.Series([], dtype=float),
                                 "issued_utc": pd.Series([], dtype="datetime64[ns, UTC]")})
        issued = utc_from_db(issued)  # func.max bypasses the column type in SQLite: text there
        rows = conn.execute(select(driver_forecasts.c.variable, driver_forecasts.c.valid_utc,
                                   driver_forecasts.c.value, driver_forecasts.c.issued_utc)
                            .where(driver_forecasts.c.station_id == station_id,
                                   driver_forecasts.c.issued_utc == issued)
                            .order_by(driver_forecasts.c.variable, driver_forecasts.c.valid_utc,
                                      driver_forecasts.c.source)).fetchall()
    var, valid, value, iss = zip(*rows)
    frame = pd.DataFrame({"variable": list(var), "valid_utc": utc_series_from_db(valid),
                          "value": np.asarray(value, dtype=float), "issued_utc": utc_series_from_db(iss)})
    # two sources with the same forecast: keep the first per (variable, valid time)
    return frame.drop_duplicates(["variable", "valid_utc"], keep="first").reset_index(drop=True)


def ingest_summary(engine: Engine) -> dict:
    """Totals over all batches and the most common kinds of rejection reason.

    {"batches", "received", "accepted", "flagged", "rejected", "duplicate",
    "failed_batches", "top_reasons": [(reason, count), …] (at most ten)}.
    """
    from monitor.ingest.batches import reason_kind

    b = ingest_batches.c
    with engine.connect() as conn:
        totals = conn.execute(select(func.count(b.id), func.coalesce(func.sum(b.received), 0),
                                     func.coalesce(func.sum(b.accepted), 0), func.coalesce(func.sum(b.flagged), 0),
                                     func.coalesce(func.sum(b.rejected), 0), func.coalesce(func.sum(b.duplicate), 0),
                                     func.coalesce(func.sum(case((b.status == "failed", 1), else_=0)), 0))
                              ).one()
        reasons = conn.execute(select(rejected_rows.c.reason, func.count()).group_by(rejected_rows.c.reason)).fetchall()
    kinds: Counter = Counter()
    for reason, n in reasons:
        kinds[reason_kind(reason)] += int(n)
    keys = ("batches", "received", "accepted", "flagged", "rejected", "duplicate", "failed_batches")
    out = {k: int(v) for k, v in zip(keys, totals)}
    out["top_reasons"] = kinds.most_common(10)
    return out


def batches_frame(engine: Engine, feed: str | None = None, limit: int | None = None) -> pd.DataFrame:
    """Ingest batches, newest first: id, feed, origin, sha256, archive_path, received_at, status, counts, message."""
    q = select(ingest_batches).order_by(ingest_batches.c.id.desc())
    if feed is not None:
        q = q.where(ingest_batches.c.feed == feed)
    if limit is not None:
        q = q.limit(int(limit))
    with engine.connect() as conn:
        rows = conn.execute(q).mappings().fetchall()
    frame = pd.DataFrame([dict(r) for r in rows], columns=[c.name for c in ingest_batches.columns])
    if len(frame):
        frame["received_at"] = utc_series_from_db(frame["received_at"])
    return frame


def rejected_rows_frame(engine: Engine, batch_id: int | None = None) -> pd.DataFrame:
    """Rejected rows (all, or of one batch): batch_id, feed, origin, line, raw, reason; by batch and line."""
    r, b = rejected_rows.c, ingest_batches.c
    q = (select(r.batch_id, b.feed, b.origin, r.line, r.raw, r.reason)
         .join_from(rejected_rows, ingest_batches, r.batch_id == b.id)
         .order_by(r.batch_id, r.line, r.id))
    if batch_id is not None:
        q = q.where(r.batch_id == int(batch_id))
    with engine.connect() as conn:
        rows = conn.execute(q).fetchall()
    return pd.DataFrame([tuple(x) for x in rows], columns=["batch_id", "feed", "origin", "line", "raw", "reason"])
