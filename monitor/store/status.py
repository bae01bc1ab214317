"""Read-only queries behind the status pages and the API.

Forecast runs and their values (with paging and the neighbours of a run),
the analysis history (day 0 of earlier runs), observed daily means (days of
the water body's own time zone), the current alert status with the time a
basin entered alert, staleness of the newest forecast and the alert events.
Everything returns plain dicts and lists (times as aware UTC datetimes), so
views only render. Nothing here writes. Readings per station (QC flags,
data health) are in :mod:`monitor.store.station_health`.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from collections import defaultdict
from collections.abc import Iterable
from zoneinfo import ZoneInfo

from sqlalchemy import and_, func, select
from sqlalchemy.engine import Engine

from monitor.alerting.frameworks import FRAMEWORKS
from monitor.alerting.levels import level_info
from monitor.alerting.rules import QUANTITY, exceedance_maxima
from monitor.store.schema import alert_events, alert_status, forecast_runs, forecast_values, ingest_batches, readings

STATISTICS = ("mean", "q05", "q25", "q50", "q75", "q95")
#: QC flags of readings shown as observations: 1 pass (QARTOD; "not evaluated" 2 is not shown).
MAX_FLAG = 1
#: The sensor variable that observes the cyanobacteria group's chlorophyll-a.
OBSERVED_VARIABLE = "phycocyanin"
DAY = dt.timedelta(days=1)
#: The newest forecast is stale when its analysis is older than this: one missed
#: daily cycle and a margin for a late run (Bloomline's own rule).
STALE_AFTER = dt.timedelta(hours=36)
#: The largest id an integer column holds in every supported database (32-bit signed).
MAX_ID = 2**31 - 1


def _run(r) -> dict:
    return dict(id=int(r.id), water_body_id=r.water_body_id, analysis_utc=r.analysis_utc,
                created_at=r.created_at, status=r.status, message=r.message or "",
                diagnostics=r.diagnostics or {})


def latest_run(engine: Engine, water_body_id: str, *, statuses: Iterable[str] | None = None) -> dict | None:
    """The newest forecast run of a water body (by analysis time), optionally of given statuses."""
    q = (select(forecast_runs).where(forecast_runs.c.water_body_id == water_body_id)
         .order_by(forecast_runs.c.analysis_utc.desc()).limit(1))
    if statuses is not None:
        q = q.where(forecast_runs.c.status.in_(list(statuses)))
    with engine.connect() as conn:
        r = conn.execute(q).first()
    return _run(r) if r is not None else None


def get_run(engine: Engine, run_id: int) -> dict | None:
    """The run with this id, or None (also for ids no integer column can hold)."""
    if not 1 <= int(run_id) <= MAX_ID:
        return None
    with engine.connect() as conn:
        r = conn.execute(select(forecast_runs).where(forecast_runs.c.id == run_id)).first()
    return _run(r) if r is not None else None


def _runs_between(q, start: dt.datetime | None, end: dt.datetime | None):
    if start is not None:
        q = q.where(forecast_runs.c.analysis_utc >= start)
    if end is not None:
        q = q.where(forecast_runs.c.analysis_utc <= end)
    return q


def list_runs(engine: Engine, water_body_id: str, *, start: dt.datetime | None = None,
              end: dt.datetime | None = None, limit: int | None = None, offset: int = 0) -> list[dict]:
    """Forecast runs of a water body, newest first, analysis time in [start, end]; ``limit`` of them
    after skipping ``offset``."""
    q = _runs_between(select(forecast_runs).where(forecast_runs.c.water_body_id == water_body_id)
                      .order_by(forecast_runs.c.analysis_utc.desc()), start, end)
    if limit is not None:
        q = q.limit(limit)
    if offset:
        q = q.offset(offset)
    with engine.connect() as conn:
        return [_run(r) for r in conn.execute(q)]


def count_runs(engine: Engine, water_body_id: str, *, start: dt.datetime | None = None,
               end: dt.datetime | None = None) -> int:
    """How many forecast runs of a water body have their analysis time in [start, end]."""
    q = _runs_between(select(func.count()).select_from(forecast_runs)
                      .where(forecast_runs.c.water_body_id == water_body_id), start, end)
    with engine.connect() as conn:
        return int(conn.execute(q).scalar_one())


def run_neighbours(engine: Engine, run: dict) -> dict:
    """``{"previous": run | None, "next": run | None}``: the runs of the same water body just
    before and after ``run`` by analysis time (for navigating between runs)."""
    base = select(forecast_runs).where(forecast_runs.c.water_body_id == run["water_body_id"])
    with engine.connect() as conn:
        prev = conn.execute(base.where(forecast_runs.c.analysis_utc < run["analysis_utc"])
                            .order_by(forecast_runs.c.analysis_utc.desc()).limit(1)).first()
        nxt = conn.execute(base.where(forecast_runs.c.analysis_utc > run["analysis_utc"])
                           .order_by(forecast_runs.c.analysis_utc).limit(1)).first()
    return {"previous": _run(prev) if prev is not None else None, "next": _run(nxt) if nxt is not None else None}


def forecast_age(run: dict | None, now: dt.datetime, horizon_days: int) -> dict:
    """How old a run is at ``now``: ``{"age": timedelta | None, "stale": bool, "expired": bool}``.

    Stale: the analysis is older than :data:`STALE_AFTER` (a newer daily run
    should exist). Expired: the whole forecast horizon lies in the past.
    """
    if run is None:
        return {"age": None, "stale": False, "expired": False}
    age = now - run["analysis_utc"]
    return {"age": age, "stale": age > STALE_AFTER, "expired": age > dt.timedelta(days=horizon_days)}


def run_values(engine: Engine, run_id: int, *, basin_id: str | None = None,
               quantity: str | None = None) -> list[dict]:
    """Every stored value of a run: basin_id, valid_utc, quantity, statistic, value."""
    q = select(forecast_values).where(forecast_values.c.run_id == run_id)
    if basin_id is not None:
        q = q.where(forecast_values.c.basin_id == basin_id)
    if quantity is not None:
        q = q.where(forecast_values.c.quantity == quantity)
    q = q.order_by(forecast_values.c.basin_id, forecast_values.c.quantity, forecast_values.c.valid_utc,
                   forecast_values.c.statistic)
    with engine.connect() as conn:
        return [dict(basin_id=r.basin_id, valid_utc=r.valid_utc, quantity=r.quantity,
                     statistic=r.statistic, value=float(r.value)) for r in conn.execute(q)]


def forecast_series(engine: Engine, run: dict, basin_id: str, quantity: str = QUANTITY) -> list[dict]:
    """One row per forecast day: valid_utc, lead_days and every statistic as a key."""
    by_day: dict[dt.datetime, dict] = {}
    for v in run_values(engine, run["id"], basin_id=basin_id, quantity=quantity):
        row = by_day.setdefault(v["valid_utc"], {
            "valid_utc": v["valid_utc"],
            "lead_days": round((v["valid_utc"] - run["analysis_utc"]) / DAY)})
        row[v["statistic"]] = v["value"]
    return [by_day[k] for k in sorted(by_day)]


def analysis_history(engine: Engine, water_body_id: str, basin_id: str, *, quantity: str = QUANTITY,
                     start: dt.datetime | None = None, end: dt.datetime | None = None,
                     limit: int | None = None, offset: int = 0) -> list[dict]:
    """Day 0 (the analysis) of each run in [start, end], oldest first.

    Each row: run_id, analysis_utc, status and the statistics stored for
    valid_utc == analysis_utc (mean, q05 … q95). With ``limit``, only the
    newest ``limit`` runs of the window after skipping the ``offset`` newest.
    """
    if limit is not None or offset:
        window = list_runs(engine, water_body_id, start=start, end=end, limit=limit, offset=offset)
        if not window:
            return []
        start, end = window[-1]["analysis_utc"], window[0]["analysis_utc"]
    q = (select(forecast_runs.c.id, forecast_runs.c.analysis_utc, forecast_runs.c.status,
                forecast_values.c.statistic, forecast_values.c.value)
         .select_from(forecast_runs.join(forecast_values, forecast_values.c.run_id == forecast_runs.c.id))
         .where(and_(forecast_runs.c.water_body_id == water_body_id,
                     forecast_values.c.basin_id == basin_id,
                     forecast_values.c.quantity == quantity,
                     forecast_values.c.valid_utc == forecast_runs.c.analysis_utc,
                     forecast_values.c.statistic.in_(STATISTICS)))
         .order_by(forecast_runs.c.analysis_utc))
    if start is not None:
        q = q.where(forecast_runs.c.analysis_utc >= start)
    if end is not None:
        q = q.where(forecast_runs.c.analysis_utc <= end)
    out: dict[int, dict] = {}
    with engine.connect() as conn:
        for run_id, t, status, statistic, value in conn.execute(q):
            row = out.setdefault(run_id, {"run_id": int(run_id), "analysis_utc": t, "status": status})
            row[statistic] = float(value)
    return sorted(out.values(), key=lambda r: r["analysis_utc"])


def basin_stations(config, water_body_id: str, basin_id: str, variable: str = OBSERVED_VARIABLE) -> list[str]:
    """Ids of the stations in a basin that measure ``variable``."""
    return [st.id for st in config.stations_of(water_body_id, basin=basin_id, variable=variable)]


def observed_daily(engine: Engine, config, water_body_id: str, basin_id: str, *,
                   variable: str = OBSERVED_VARIABLE, start: dt.datetime | None = None,
                   end: dt.datetime | None = None, tz: dt.tzinfo | None = None) -> list[dict]:
    """Daily means of QC-passed readings of ``variable`` in a basin, by calendar day in ``tz``.

    ``tz``: the water body's time zone (default: its configured zone).
    Rows: day (the local date), day_start_utc (local midnight as aware UTC),
    mean [µg/L], n (readings). Readings with a QC flag above
    :data:`MAX_FLAG` are left out.
    """
    if tz is None:
        tz = ZoneInfo(config.water_body(water_body_id).timezone)
    stations = basin_stations(config, water_body_id, basin_id, variable)
    if not stations:
        return []
    q = (select(readings.c.time_utc, readings.c.value)
         .where(and_(readings.c.station_id.in_(stations), readings.c.variable == variable,
                     readings.c.qc_flag <= MAX_FLAG)))
    if start is not None:
        q = q.where(readings.c.time_utc >= start)
    if end is not None:
        q = q.where(readings.c.time_utc < end)
    sums: dict[dt.date, list[float]] = defaultdict(lambda: [0.0, 0])
    with engine.connect() as conn:
        for t, value in conn.execute(q):
            acc = sums[t.astimezone(tz).date()]
            acc[0] += float(value)
            acc[1] += 1
    return [{"day": d, "day_start_utc": dt.datetime(d.year, d.month, d.day, tzinfo=tz).astimezone(dt.UTC),
             "mean": s / n, "n": n}
            for d, (s, n) in sorted(sums.items())]


def current_status(engine: Engine, water_body_id: str) -> dict[str, dict]:
    """``{basin_id: {level, since_utc, quiet_cycles, updated_utc}}`` from ``alert_status``."""
    with engine.connect() as conn:
        rows = conn.execute(select(alert_status).where(alert_status.c.water_body_id == water_body_id))
        return {r.basin_id: dict(level=int(r.level), since_utc=r.since_utc, quiet_cycles=int(r.quiet_cycles),
                                 updated_utc=r.updated_utc) for r in rows}


def list_alert_events(engine: Engine, water_body_id: str | None = None, *, basin_id: str | None = None,
                      start: dt.datetime | None = None, end: dt.datetime | None = None,
                      limit: int | None = None) -> list[dict]:
    """Alert changes, newest first."""
    q = select(alert_events).order_by(alert_events.c.time_utc.desc(), alert_events.c.id.desc())
    if water_body_id is not None:
        q = q.where(alert_events.c.water_body_id == water_body_id)
    if basin_id is not None:
        q = q.where(alert_events.c.basin_id == basin_id)
    if start is not None:
        q = q.where(alert_events.c.time_utc >= start)
    if end is not None:
        q = q.where(alert_events.c.time_utc <= end)
    if limit is not None:
        q = q.limit(limit)
    with engine.connect() as conn:
        return [dict(id=int(r.id), water_body_id=r.water_body_id, basin_id=r.basin_id, time_utc=r.time_utc,
                     from_level=int(r.from_level), to_level=int(r.to_level), probability=r.probability,
                     observed_ugL=r.observed_ugL, reason=r.reason) for r in conn.execute(q)]


def framework_info(water_body) -> dict:
    """Id, title and source of the water body's alert framework, and its levels."""
    fw = FRAMEWORKS.get(water_body.alerts.framework)
    return {
        "id": water_body.alerts.framework,
        "title": fw.title if fw else f"Custom alert levels ({water_body.alerts.framework})",
        "source": fw.source if fw else "Levels set in this water body's configuration.",
        "levels": [level_info(water_body, lv.number) for lv in water_body.alerts.levels],
        "warn_probability": water_body.alerts.warn_probability,
        "horizon_days": water_body.alerts.horizon_days,
        "clear_after_cycles": water_body.alerts.clear_after_cycles,
    }


def current_levels(engine: Engine) -> dict[str, int]:
    """Each water body's highest current alert level over its basins (``alert_status``), in one query;
    water bodies without a status row are absent (level 0)."""
    with engine.connect() as conn:
        rows = conn.execute(select(alert_status.c.water_body_id, func.max(alert_status.c.level))
                            .group_by(alert_status.c.water_body_id))
        return {w: int(level or 0) for w, level in rows}


def alert_since(engine: Engine, water_body_id: str, basin_id: str, level: int,
                fallback: dt.datetime | None = None) -> dt.datetime | None:
    """When a basin at ``level`` entered alert: the time of its latest change from no level.

    A lowering (2 → 1) keeps the basin in alert, so the time counts from the
    change out of level 0, not from the last change. None at level 0;
    ``fallback`` (the status row's own time) when no such event is stored.
    """
    if level <= 0:
        return None
    q = (select(alert_events.c.time_utc)
         .where(and_(alert_events.c.water_body_id == water_body_id, alert_events.c.basin_id == basin_id,
                     alert_events.c.from_level == 0, alert_events.c.to_level > 0))
         .order_by(alert_events.c.time_utc.desc(), alert_events.c.id.desc()).limit(1))
    with engine.connect() as conn:
        t = conn.execute(q).scalar()
    return t if t is not None else fallback


def basin_state(has_run: bool, has_forecast: bool, level: int) -> str:
    """The state a basin is shown in: ``"no_forecast"`` (no run yet, or the run has no forecast
    for the basin), ``"no_level"`` (forecast, no alert level) or ``"level"``."""
    if level > 0:
        return "level"
    return "no_level" if has_run and has_forecast else "no_forecast"


def water_body_overview(engine: Engine, config, water_body, *, now: dt.datetime | None = None,
                        run: dict | None = None) -> dict:
    """Everything the status page shows for one water body, per basin.

    Per basin: the current status level (with name) and its state
    (:func:`basin_state`), since when the basin is in alert
    (:func:`alert_since`), the highest probability of reaching each level
    within the horizon in the run, and the latest observed daily mean (a
    day of the water body's time zone). ``run``: the run to show (default
    the newest); ``now`` (aware UTC) dates the run's age (:func:`forecast_age`).
    """
    run = run if run is not None else latest_run(engine, water_body.id)
    maxima: dict[str, dict[int, float]] = {}
    if run is not None:
        with engine.connect() as conn:
            maxima = exceedance_maxima(conn, run["id"], run["analysis_utc"], water_body.alerts.horizon_days)
    status = current_status(engine, water_body.id)
    tz = ZoneInfo(water_body.timezone)
    basins = []
    for b in water_body.basins:
        st = status.get(b.id)
        level = st["level"] if st else 0
        recent = None
        if run is not None:
            end = run["analysis_utc"] + DAY if now is None else min(run["analysis_utc"] + DAY, now)
            obs = observed_daily(engine, config, water_body.id, b.id, tz=tz, start=run["analysis_utc"] - 2 * DAY,
                                 end=end)
            recent = obs[-1] if obs else None
        has_forecast = b.id in maxima
        basins.append({
            "id": b.id, "name": b.name,
            "level": level_info(water_body, level),
            "state": basin_state(run is not None, has_forecast, level),
            "since_utc": alert_since(engine, water_body.id, b.id, level, st["since_utc"] if st else None),
            "changed_utc": st["since_utc"] if st else None,
            "quiet_cycles": st["quiet_cycles"] if st else 0,
            "has_forecast": has_forecast,
            "p_max": {lv.number: maxima.get(b.id, {}).get(lv.number) for lv in water_body.alerts.levels},
            "observed": recent,
        })
    age = forecast_age(run, now, water_body.alerts.horizon_days) if now is not None else forecast_age(None, now, 0)
    return {"id": water_body.id, "name": water_body.name, "use": water_body.use,
            "timezone": water_body.timezone, "framework": framework_info(water_body),
            "latest_run": run, "age": age, "basins": basins}


def store_fingerprint(engine: Engine) -> tuple:
    """A cheap fingerprint of everything pages and the API show from the store.

    It changes when a run is stored or recomputed, an alert changes, the
    status is evaluated, a reading arrives or a batch is recorded (a batch
    that changes stored QC flags also adds readings or a batch row). Each
    part is a maximum over a primary key or a small table, so it costs
    about as much as one indexed lookup.
    """
    q = select(select(func.max(forecast_runs.c.id)).scalar_subquery(),
               select(func.max(forecast_runs.c.created_at)).scalar_subquery(),
               select(func.max(alert_events.c.id)).scalar_subquery(),
               select(func.max(alert_status.c.updated_utc)).scalar_subquery(),
               select(func.count()).select_from(alert_status).scalar_subquery(),
               select(func.max(readings.c.id)).scalar_subquery(),
               select(func.max(ingest_batches.c.id)).scalar_subquery())
    with engine.connect() as conn:
        return tuple(conn.execute(q).one())


def chart_version(engine: Engine, config, water_body, basin_id: str, run: dict | None,
                  start: dt.datetime, end: dt.datetime, variables: Iterable[str]) -> str:
    """A short fingerprint of everything a basin chart over [start, end) draws.

    It changes when the run is recomputed, when a run enters the window,
    when any reading or batch is stored (:func:`store_fingerprint`: a new
    reading, or a batch whose QC re-evaluation changed stored flags), or
    when the water body's levels or time zone change, so a chart stored
    under it may be cached for good.
    """
    variables = list(variables)
    stations = sorted({s for v in variables for s in basin_stations(config, water_body.id, basin_id, v)})
    with engine.connect() as conn:
        runs = conn.execute(select(func.count(), func.max(forecast_runs.c.id), func.max(forecast_runs.c.created_at))
                            .where(and_(forecast_runs.c.water_body_id == water_body.id,
                                        forecast_runs.c.analysis_utc >= start,
                                        forecast_runs.c.analysis_utc < end))).one()
        seen = conn.execute(select(select(func.max(readings.c.id)).scalar_subquery(),
                                   select(func.max(ingest_batches.c.id)).scalar_subquery())).one()
    parts = [water_body.id, basin_id, water_body.timezone, start.isoformat(), end.isoformat(),
             [(lv.number, lv.name, lv.chlorophyll_ugL) for lv in water_body.alerts.levels],
             None if run is None else (run["id"], run["created_at"].isoformat(), run["status"]),
             tuple(runs), tuple(seen), stations, variables]
    return hashlib.sha256(repr(parts).encode("utf-8")).hexdigest()[:16]
