"""Store functions for water bodies, checkpoints and forecast runs.

Readings, batches and rejected rows live in ``monitor.store.readings`` and
``monitor.ingest.batches``; alert state in ``monitor.alerting.rules``; subscribers in
``monitor.alerting.subscriptions``. Everything goes through SQLAlchemy Core and works
on SQLite and PostgreSQL alike.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable

import numpy as np
from sqlalchemy import delete, func, insert, select, update
from sqlalchemy.engine import Engine

from monitor.config import Config
from monitor.store import schema
from monitor.store.txn import Bind, begin, reading
from monitor.timeutil import now_utc


def sync_config(engine: Engine, config: Config) -> None:
    """Write the configured water bodies, basins and stations (insert or update)."""
    with engine.begin() as conn:
        for wb in config.water_bodies:
            row = dict(id=wb.id, name=wb.name, use=wb.use, timezone=wb.timezone, framework=wb.alerts.framework)
            if conn.execute(select(schema.water_bodies.c.id).where(schema.water_bodies.c.id == wb.id)).first():
                conn.execute(update(schema.water_bodies).where(schema.water_bodies.c.id == wb.id).values(**row))
            else:
                conn.execute(insert(schema.water_bodies).values(**row))
            conn.execute(delete(schema.basins).where(schema.basins.c.water_body_id == wb.id))
            conn.execute(insert(schema.basins), [
                dict(water_body_id=wb.id, id=b.id, name=b.name, volume_m3=b.volume_m3,
                     mean_depth_m=b.mean_depth_m, area_m2=b.area_m2, flows_to=b.flows_to)
                for b in wb.basins])
        for st in config.stations:
            row = dict(id=st.id, kind=st.kind, water_body_id=st.water_body, basin_id=st.basin)
            if conn.execute(select(schema.stations.c.id).where(schema.stations.c.id == st.id)).first():
                conn.execute(update(schema.stations).where(schema.stations.c.id == st.id).values(**row))
            else:
                conn.execute(insert(schema.stations).values(**row))


# --------------------------------------------------------------------------
# Checkpoints


def save_checkpoint(bind: Bind, water_body_id: str, time_utc: dt.datetime, data: bytes,
                    *, now: dt.datetime | None = None) -> None:
    """Store the checkpoint of ``water_body_id`` at ``time_utc`` (replacing one at the same time).

    ``bind``: an engine (own transaction) or a connection (the caller's transaction).
    """
    t = schema.checkpoints
    with begin(bind) as conn:
        conn.execute(delete(t).where((t.c.water_body_id == water_body_id) & (t.c.time_utc == time_utc)))
        conn.execute(insert(t).values(water_body_id=water_body_id, time_utc=time_utc,
                                      created_at=now or now_utc(), data=data))


def latest_checkpoint(engine: Engine, water_body_id: str,
                      at_or_before: dt.datetime | None = None) -> tuple[dt.datetime, bytes] | None:
    """The newest checkpoint (time, bytes) of a water body, optionally at or before a time."""
    t = schema.checkpoints
    q = select(t.c.time_utc, t.c.data).where(t.c.water_body_id == water_body_id)
    if at_or_before is not None:
        q = q.where(t.c.time_utc <= at_or_before)
    with engine.connect() as conn:
        row = conn.execute(q.order_by(t.c.time_utc.desc()).limit(1)).first()
    return (row.time_utc, bytes(row.data)) if row else None


def prune_checkpoints(engine: Engine, water_body_id: str, keep: int = 14) -> int:
    """Delete all but the newest ``keep`` checkpoints of a water body; returns how many went."""
    t = schema.checkpoints
    with engine.begin() as conn:
        times = conn.execute(select(t.c.time_utc).where(t.c.water_body_id == water_body_id)
                             .order_by(t.c.time_utc.desc())).scalars().all()
        if len(times) <= keep:
            return 0
        cutoff = times[keep - 1]
        return conn.execute(delete(t).where((t.c.water_body_id == water_body_id)
                                            & (t.c.time_utc < cutoff))).rowcount


# --------------------------------------------------------------------------
# Forecast runs


def save_forecast_run(bind: Bind, water_body_id: str, analysis_utc: dt.datetime, status: str,
                      message: str, diagnostics: dict | None,
                      values: Iterable[tuple[str, dt.datetime, str, str, float]],
                      *, members: Iterable[tuple[str, str, str, str, np.ndarray]] = (),
                      now: dt.datetime | None = None) -> int:
    """Store one forecast run and its values; returns the run id.

    ``values`` holds (basin_id, valid_utc, quantity, statistic, value) tuples
    (see ``monitor.store.schema.forecast_values``); ``members`` holds
    (basin_id, quantity, forecaster, observed variable, array (days, members))
    of the members' daily means of Bloomline and of the baselines.
    A run for the same water body
    and analysis time replaces the earlier one, so re-running a cycle is
    idempotent. ``bind``: an engine (own transaction) or a connection (the
    caller's: the cycle records checkpoint, run and alerts together).
    """
    runs, vals = schema.forecast_runs, schema.forecast_values
    with begin(bind) as conn:
        old = conn.execute(select(runs.c.id).where((runs.c.water_body_id == water_body_id)
                                                   & (runs.c.analysis_utc == analysis_utc))).scalar()
        if old is not None:
            conn.execute(delete(vals).where(vals.c.run_id == old))
            conn.execute(delete(schema.forecast_members).where(schema.forecast_members.c.run_id == old))
            conn.execute(delete(schema.forecast_scores).where(schema.forecast_scores.c.run_id == old))
            conn.execute(update(runs).where(runs.c.id == old).values(
                status=status, message=message, diagnostics=diagnostics, created_at=now or now_utc()))
            run_id = old
        else:
            run_id = conn.execute(insert(runs).values(
                water_body_id=water_body_id, analysis_utc=analysis_utc, created_at=now or now_utc(),
                status=status, message=message, diagnostics=diagnostics)).inserted_primary_key[0]
        rows = [dict(run_id=run_id, basin_id=b, valid_utc=t, quantity=q, statistic=s, value=float(v))
                for b, t, q, s, v in values]
        if rows:
            conn.execute(insert(vals), rows)
        ensembles = [dict(run_id=run_id, basin_id=b, quantity=q, forecaster=f, variable=v, days=a.shape[0],
                          members=a.shape[1], data=np.ascontiguousarray(a, dtype="<f4").tobytes())
                     for b, q, f, v, a in ((b, q, f, v, np.asarray(a)) for b, q, f, v, a in members)]
        if ensembles:
            conn.execute(insert(schema.forecast_members), ensembles)
    return run_id


def load_forecast_members(engine: Engine, run_ids: Iterable[int]
                          ) -> dict[tuple[int, str, str, str], tuple[str, np.ndarray]]:
    """Stored member daily means, keyed (run_id, basin_id, quantity, forecaster) →
    (observed variable, array (days, members) [µg/L])."""
    t = schema.forecast_members
    ids = list(run_ids)
    out: dict[tuple[int, str, str], np.ndarray] = {}
    with engine.connect() as conn:
        for start in range(0, len(ids), 500):
            for row in conn.execute(select(t).where(t.c.run_id.in_(ids[start:start + 500]))):
                out[(row.run_id, row.basin_id, row.quantity, row.forecaster)] = (row.variable, np.frombuffer(
                    bytes(row.data), dtype="<f4").astype(float).reshape(row.days, row.members))
    return out


def count_forecast_runs(bind: Bind, water_body_id: str, *, before: dt.datetime | None = None) -> int:
    """How many forecast runs of a water body are stored (with an analysis time before ``before``)."""
    runs = schema.forecast_runs
    q = select(func.count()).select_from(runs).where(runs.c.water_body_id == water_body_id)
    if before is not None:
        q = q.where(runs.c.analysis_utc < before)
    with reading(bind) as conn:
        return int(conn.execute(q).scalar())


def runs_since_cold_start(bind: Bind, water_body_id: str, analysis: dt.datetime, most: int,
                          gap: dt.timedelta) -> int:
    """How many of the newest runs before ``analysis`` (at most ``most``) follow each other without a gap
    longer than ``gap`` up to ``analysis``: the cycles since the last cold start, counted to ``most``."""
    runs = schema.forecast_runs
    q = (select(runs.c.analysis_utc).where(runs.c.water_body_id == water_body_id, runs.c.analysis_utc < analysis)
         .order_by(runs.c.analysis_utc.desc()).limit(max(int(most), 0)))
    with reading(bind) as conn:
        times = [t for (t,) in conn.execute(q).all()]
    n, later = 0, analysis
    for t in times:
        if later - t > gap:
            break
        n, later = n + 1, t
    return n


def newest_run_times(bind: Bind) -> dict[str, dt.datetime]:
    """The analysis time of each water body's newest stored forecast run (any status)."""
    runs = schema.forecast_runs
    with reading(bind) as conn:
        return {wb: t for wb, t in conn.execute(
            select(runs.c.water_body_id, func.max(runs.c.analysis_utc)).group_by(runs.c.water_body_id))}
