"""The JSON and CSV API (mounted at ``/api/v1``).

Every payload with a forecast or an alert carries the caution: JSON as a
top-level ``"caution"`` key, CSV as a first comment line (``# …``; read it
with ``pandas.read_csv(..., comment="#")``) and an ``X-Bloomline-Caution``
header. Times are ISO 8601 in UTC (``2026-08-01T06:00:00Z``). Errors come as
JSON ``{"error": {"status", "name", "message"}}`` with the matching status
code. ``?format=csv`` selects CSV where a table makes sense.
"""

from __future__ import annotations

import csv
import datetime as dt
import io

from flask import Blueprint, Response, abort, jsonify, request, url_for

from monitor.alerting.caution import CAUTION
from monitor.alerting.levels import level_label
from monitor.forecasting.quantities import QUANTITIES, UNITS
from monitor.store import status
from web import get_config, get_engine, water_body_or_404

api = Blueprint("api", __name__)


def _iso(t: dt.datetime | None) -> str | None:
    return None if t is None else t.astimezone(dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def _jsonable(x):
    if isinstance(x, dt.datetime):
        return _iso(x)
    if isinstance(x, dict):
        return {str(k): _jsonable(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_jsonable(v) for v in x]
    return x


def _json(payload: dict, caution: bool = True):
    body = {"caution": CAUTION, **payload} if caution else payload
    response = jsonify(_jsonable(body))
    if caution:
        response.headers["X-Bloomline-Caution"] = CAUTION
    return response


def _csv(rows: list[dict], columns: list[str], filename: str) -> Response:
    buf = io.StringIO()
    buf.write(f"# {CAUTION}\n")
    writer = csv.DictWriter(buf, fieldnames=columns, extrasaction="ignore", lineterminator="\n")
    writer.writeheader()
    for r in rows:
        writer.writerow({k: (_iso(v) if isinstance(v, dt.datetime) else ("" if v is None else v))
                         for k, v in r.items()})
    return Response(buf.getvalue(), mimetype="text/csv", headers={
        "Content-Disposition": f'attachment; filename="{filename}"', "X-Bloomline-Caution": CAUTION})


def _format() -> str:
    fmt = request.args.get("format", "json")
    if fmt not in ("json", "csv"):
        abort(400, description=f"format must be json or csv, got {fmt!r}")
    return fmt


def _time_arg(name: str) -> dt.datetime | None:
    value = request.args.get(name)
    if value is None or value == "":
        return None
    try:
        t = dt.datetime.fromisoformat(value.replace("Z", "+00:00"))
    except ValueError:
        abort(400, description=f"{name} must be an ISO 8601 date or time, got {value!r}")
    return t if t.tzinfo is not None else t.replace(tzinfo=dt.UTC)


def _basins_arg(wb) -> list[str]:
    basin = request.args.get("basin")
    ids = [b.id for b in wb.basins]
    if basin is None:
        return ids
    if basin not in ids:
        abort(404, description=f"{wb.id} has no basin {basin!r}; basins: {', '.join(ids)}")
    return [basin]


def _quantity_arg() -> str | None:
    q = request.args.get("quantity")
    if q is not None and q not in QUANTITIES:
        abort(400, description=f"quantity must be one of {', '.join(QUANTITIES)}, got {q!r}")
    return q


def _describe(wb) -> dict:
    return {
        "id": wb.id, "name": wb.name, "use": wb.use, "timezone": wb.timezone,
        "basins": [{"id": b.id, "name": b.name, "volume_m3": b.volume_m3, "mean_depth_m": b.mean_depth_m,
                    "area_m2": b.area_m2, "flows_to": b.flows_to} for b in wb.basins],
        "framework": status.framework_info(wb),
        "links": {
            "status": url_for("api.water_body_status", water_body_id=wb.id),
            "forecast": url_for("api.latest_forecast", water_body_id=wb.id),
            "runs": url_for("api.runs", water_body_id=wb.id),
            "history": url_for("api.history", water_body_id=wb.id),
            "alert_events": url_for("api.alert_events", water_body_id=wb.id),
            "page": url_for("pages.water_body", water_body_id=wb.id),
        },
    }


def _status_payload(ov: dict) -> dict:
    return {
        "id": ov["id"], "name": ov["name"], "use": ov["use"],
        "framework": {k: ov["framework"][k] for k in ("id", "title", "source")},
        "latest_run": _run_summary(ov["latest_run"]),
        "basins": [{
            "id": b["id"], "name": b["name"], "level": b["level"]["number"], "level_name": b["level"]["name"],
            "since_utc": b["since_utc"], "has_forecast": b["has_forecast"],
            "p_max_within_horizon": {str(k): v for k, v in b["p_max"].items()},
            "observed": ({"day": b["observed"]["day"], "mean_ugL": b["observed"]["mean"]}
                         if b["observed"] else None),
        } for b in ov["basins"]],
    }


def _run_summary(run: dict | None) -> dict | None:
    if run is None:
        return None
    return {k: run[k] for k in ("id", "analysis_utc", "created_at", "status", "message", "diagnostics")}


@api.route("/")
def index():
    return _json({"endpoints": {
        "water_bodies": url_for("api.water_bodies"),
        "status": url_for("api.all_status"),
        "water_body": "/api/v1/water-bodies/<id>",
        "latest_forecast": "/api/v1/water-bodies/<id>/forecast?basin=&quantity=&format=json|csv",
        "runs": "/api/v1/water-bodies/<id>/runs?start=&end=&limit=",
        "run_forecast": "/api/v1/water-bodies/<id>/runs/<run_id>/forecast?basin=&quantity=&format=",
        "history": "/api/v1/water-bodies/<id>/history?basin=&quantity=&start=&end=&format=",
        "alert_events": "/api/v1/water-bodies/<id>/alert-events?basin=&start=&end=&format=",
    }}, caution=False)


@api.route("/water-bodies")
def water_bodies():
    return _json({"water_bodies": [_describe(wb) for wb in get_config().water_bodies]}, caution=False)


@api.route("/water-bodies/<water_body_id>")
def water_body(water_body_id: str):
    return _json(_describe(water_body_or_404(water_body_id)), caution=False)


@api.route("/status")
def all_status():
    cfg, engine = get_config(), get_engine()
    return _json({"water_bodies": [_status_payload(status.water_body_overview(engine, cfg, wb))
                                   for wb in cfg.water_bodies]})


@api.route("/water-bodies/<water_body_id>/status")
def water_body_status(water_body_id: str):
    wb = water_body_or_404(water_body_id)
    return _json(_status_payload(status.water_body_overview(get_engine(), get_config(), wb)))


FORECAST_COLUMNS = ["run_id", "analysis_utc", "basin_id", "valid_utc", "lead_days", "quantity", "statistic", "value"]


def _forecast_response(wb, run: dict):
    fmt = _format()
    basins = _basins_arg(wb)
    quantity = _quantity_arg()
    rows = []
    for v in status.run_values(get_engine(), run["id"], quantity=quantity):
        if v["basin_id"] in basins:
            rows.append({"run_id": run["id"], "analysis_utc": run["analysis_utc"],
                         "lead_days": round((v["valid_utc"] - run["analysis_utc"]) / status.DAY), **v})
    if fmt == "csv":
        return _csv(rows, FORECAST_COLUMNS, f"{wb.id}-forecast-{run['analysis_utc']:%Y%m%d}.csv")
    per_basin: dict[str, dict] = {b: {} for b in basins}
    for r in rows:
        series = per_basin[r["basin_id"]].setdefault(r["quantity"], {})
        day = series.setdefault(_iso(r["valid_utc"]), {"valid_utc": r["valid_utc"], "lead_days": r["lead_days"]})
        day[r["statistic"]] = r["value"]
    return _json({
        "water_body_id": wb.id, "run": _run_summary(run),
        "units": {**UNITS, "p_level_<n>": "probability 0-1"},
        "levels": status.framework_info(wb)["levels"],
        "basins": {b: {q: list(days.values()) for q, days in per_basin[b].items()} for b in basins},
    })


@api.route("/water-bodies/<water_body_id>/forecast")
def latest_forecast(water_body_id: str):
    wb = water_body_or_404(water_body_id)
    run = status.latest_run(get_engine(), wb.id)
    if run is None:
        abort(404, description=f"no forecast has been issued for {wb.id} yet")
    return _forecast_response(wb, run)


@api.route("/water-bodies/<water_body_id>/runs/<int:run_id>/forecast")
def run_forecast(water_body_id: str, run_id: int):
    wb = water_body_or_404(water_body_id)
    run = status.get_run(get_engine(), run_id)
    if run is None or run["water_body_id"] != wb.id:
        abort(404, description=f"{wb.id} has no forecast run {run_id}")
    return _forecast_response(wb, run)


@api.route("/water-bodies/<water_body_id>/runs")
def runs(water_body_id: str):
    wb = water_body_or_404(water_body_id)
    limit = request.args.get("limit", type=int)
    if limit is not None and limit < 1:
        abort(400, description="limit must be a positive integer")
    found = status.list_runs(get_engine(), wb.id, start=_time_arg("start"), end=_time_arg("end"), limit=limit)
    out = []
    for r in found:
        s = _run_summary(r)
        s["forecast"] = url_for("api.run_forecast", water_body_id=wb.id, run_id=r["id"])
        out.append(s)
    return _json({"water_body_id": wb.id, "runs": out})


HISTORY_COLUMNS = ["run_id", "analysis_utc", "status", "basin_id", "quantity", *status.STATISTICS]


@api.route("/water-bodies/<water_body_id>/history")
def history(water_body_id: str):
    wb = water_body_or_404(water_body_id)
    fmt = _format()
    quantity = _quantity_arg() or status.QUANTITY
    start, end = _time_arg("start"), _time_arg("end")
    rows = []
    for basin in _basins_arg(wb):
        for h in status.analysis_history(get_engine(), wb.id, basin, quantity=quantity, start=start, end=end):
            rows.append({"basin_id": basin, "quantity": quantity, **h})
    if fmt == "csv":
        return _csv(rows, HISTORY_COLUMNS, f"{wb.id}-analysis-history.csv")
    return _json({"water_body_id": wb.id, "quantity": quantity, "analyses": rows})


EVENT_COLUMNS = ["id", "water_body_id", "basin_id", "time_utc", "from_level", "to_level", "probability",
                 "observed_ugL", "reason"]


@api.route("/water-bodies/<water_body_id>/alert-events")
def alert_events(water_body_id: str):
    wb = water_body_or_404(water_body_id)
    fmt = _format()
    basins = _basins_arg(wb)
    events = [e for e in status.list_alert_events(get_engine(), wb.id, start=_time_arg("start"),
                                                   end=_time_arg("end"))
              if e["basin_id"] in basins]
    if fmt == "csv":
        return _csv(events, EVENT_COLUMNS, f"{wb.id}-alert-events.csv")
    for e in events:
        e["from_level_name"] = level_label(wb, e["from_level"])
        e["to_level_name"] = level_label(wb, e["to_level"])
    return _json({"water_body_id": wb.id, "events": events})
