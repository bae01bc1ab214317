"""Read-only queries behind the status pages and the API.

Forecast runs and their values, the analysis history (day 0 of earlier
runs), observed daily means, the current alert status and the alert events.
Everything returns plain dicts and lists (times as aware UTC datetimes), so
views only render. Nothing here writes.
"""

from __future__ import annotations

import datetime as dt
from collections import defaultdict
from collections.abc import Iterable

from sqlalchemy import and_, select
from sqlalchemy.engine import Engine

from monitor.alerting.frameworks import FRAMEWORKS
from monitor.alerting.levels import level_info
from monitor.alerting.rules import QUANTITY, exceedance_maxima
from monitor.store.schema import alert_events, alert_status, forecast_runs, forecast_values, readings

STATISTICS = ("mean", "q05", "q25", "q50", "q75", "q95")
#: QC flags of readings shown as observations: 1 pass (QARTOD; "not evaluated" 2 is not shown).
MAX_FLAG = 1
#: The sensor variable that observes the cyanobacteria group's chlorophyll-a.
OBSERVED_VARIABLE = "phycocyanin"
DAY = dt.timedelta(days=1)


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
    with engine.connect() as conn:
        r = conn.execute(select(forecast_runs).where(forecast_runs.c.id == run_id)).first()
    return _run(r) if r is not None else None


def list_runs(engine: Engine, water_body_id: str, *, start: dt.datetime | None = None,
              end: dt.datetime | None = None, limit: int | None = None) -> list[dict]:
    """Forecast runs of a water body, newest first, analysis time in [start, end]."""
    q = (select(forecast_runs).where(forecast_runs.c.water_body_id == water_body_id)
         .order_by(forecast_runs.c.analysis_utc.desc()))
    if start is not None:
        q = q.where(forecast_runs.c.analysis_utc >= start)
    if end is not None:
        q = q.where(forecast_runs.c.analysis_utc <= end)
    if limit is not None:
        q = q.limit(limit)
    with engine.connect() as conn:
        return [_run(r) for r in conn.execute(q)]


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
                     start: dt.datetime | None = None, end: dt.datetime | None = None) -> list[dict]:
    """Day 0 (the analysis) of each run in [start, end], oldest first.

    Each row: run_id, analysis_utc, status and the statistics stored for
    valid_utc == analysis_utc (mean, q05 … q95).
    """
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
                   end: dt.datetime | None = None) -> list[dict]:
    """Daily means (UTC days) of QC-passed readings of ``variable`` in a basin.

    Rows: day (midnight UTC), mean [µg/L], n (readings). Readings with a QC
    flag above :data:`MAX_FLAG` are left out.
    """
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
            acc = sums[t.astimezone(dt.UTC).date()]
            acc[0] += float(value)
            acc[1] += 1
    return [{"day": dt.datetime(d.year, d.month, d.day, tzinfo=dt.UTC), "mean": s / n, "n": n}
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


def water_body_overview(engine: Engine, config, water_body) -> dict:
    """Everything the status page shows for one water body, per basin.

    Per basin: the current status level (with name), since when, the
    highest probability of reaching each level within the horizon in the
    latest run, and the latest observed daily mean.
    """
    run = latest_run(engine, water_body.id)
    maxima: dict[str, dict[int, float]] = {}
    if run is not None:
        with engine.connect() as conn:
            maxima = exceedance_maxima(conn, run["id"], run["analysis_utc"], water_body.alerts.horizon_days)
    status = current_status(engine, water_body.id)
    basins = []
    for b in water_body.basins:
        st = status.get(b.id)
        level = st["level"] if st else 0
        recent = None
        if run is not None:
            obs = observed_daily(engine, config, water_body.id, b.id,
                                 start=run["analysis_utc"] - 2 * DAY, end=run["analysis_utc"] + DAY)
            recent = obs[-1] if obs else None
        basins.append({
            "id": b.id, "name": b.name,
            "level": level_info(water_body, level),
            "since_utc": st["since_utc"] if st else None,
            "quiet_cycles": st["quiet_cycles"] if st else 0,
            "has_forecast": b.id in maxima,
            "p_max": {lv.number: maxima.get(b.id, {}).get(lv.number) for lv in water_body.alerts.levels},
            "observed": recent,
        })
    return {"id": water_body.id, "name": water_body.name, "use": water_body.use,
            "timezone": water_body.timezone, "framework": framework_info(water_body),
            "latest_run": run, "basins": basins}
