"""The shapes of the API's answers: JSON bodies, CSV tables and paging.

Every answer carries the caution: JSON as a top-level ``"caution"`` key, CSV
as a first comment line (``# …``; read it with ``pandas.read_csv(...,
comment="#")``), both with an ``X-Bloomline-Caution`` header. Times are ISO
8601 in UTC (``2026-08-01T06:00:00Z``); observed days are the water body's
local calendar days (``2026-08-01``) with the UTC time they start at.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
from urllib.parse import urlencode

from flask import Response, jsonify, request, url_for

from monitor.alerting.caution import CAUTION
from monitor.store import status


def iso(t: dt.datetime | None) -> str | None:
    return None if t is None else t.astimezone(dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def jsonable(x):
    if isinstance(x, dt.datetime):
        return iso(x)
    if isinstance(x, dt.date):
        return x.isoformat()
    if isinstance(x, dict):
        return {str(k): jsonable(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [jsonable(v) for v in x]
    return x


def json_answer(payload: dict, headers: dict | None = None) -> Response:
    response = jsonify(jsonable({"caution": CAUTION, **payload}))
    response.headers["X-Bloomline-Caution"] = CAUTION
    for k, v in (headers or {}).items():
        response.headers[k] = v
    return response


def _cell(v) -> str:
    if isinstance(v, dt.datetime):
        return iso(v)
    if isinstance(v, dt.date):
        return v.isoformat()
    return "" if v is None else v


def csv_answer(rows: list[dict], columns: list[str], filename: str, headers: dict | None = None) -> Response:
    buf = io.StringIO()
    buf.write(f"# {CAUTION}\n")
    writer = csv.DictWriter(buf, fieldnames=columns, extrasaction="ignore", lineterminator="\n")
    writer.writeheader()
    for r in rows:
        writer.writerow({k: _cell(v) for k, v in r.items()})
    return Response(buf.getvalue(), mimetype="text/csv", headers={
        "Content-Disposition": f'attachment; filename="{filename}"', "X-Bloomline-Caution": CAUTION,
        **(headers or {})})


def paging(limit: int, offset: int, total: int) -> tuple[dict, dict]:
    """The ``paging`` object of a list answer and its ``Link`` header (RFC 8288)."""
    def page_url(new_offset: int) -> str:
        args = {k: v for k, v in request.args.items() if k != "offset"}
        args["offset"] = new_offset
        return f"{request.path}?{urlencode(args)}"

    nxt = page_url(offset + limit) if offset + limit < total else None
    prev = page_url(max(0, offset - limit)) if offset > 0 else None
    links = [f'<{u}>; rel="{rel}"' for u, rel in ((nxt, "next"), (prev, "prev")) if u]
    return ({"limit": limit, "offset": offset, "total": total, "next": nxt, "previous": prev},
            {"Link": ", ".join(links)} if links else {})


def describe(wb) -> dict:
    return {
        "id": wb.id, "name": wb.name, "use": wb.use, "timezone": wb.timezone, "region": wb.region,
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


BASIN_COLUMNS = ["water_body_id", "water_body_name", "use", "timezone", "framework", "basin_id", "basin_name",
                 "volume_m3", "mean_depth_m", "area_m2", "flows_to"]


def basin_rows(wb) -> list[dict]:
    return [{"water_body_id": wb.id, "water_body_name": wb.name, "use": wb.use, "timezone": wb.timezone,
             "framework": wb.alerts.framework, "basin_id": b.id, "basin_name": b.name, "volume_m3": b.volume_m3,
             "mean_depth_m": b.mean_depth_m, "area_m2": b.area_m2, "flows_to": b.flows_to} for b in wb.basins]


def run_summary(run: dict | None, *, diagnostics: bool = False) -> dict | None:
    if run is None:
        return None
    keys = ("id", "analysis_utc", "created_at", "status", "message") + (("diagnostics",) if diagnostics else ())
    return {k: run[k] for k in keys}


def status_payload(ov: dict, members: int) -> dict:
    age = ov["age"]
    return {
        "id": ov["id"], "name": ov["name"], "use": ov["use"], "timezone": ov["timezone"],
        "framework": {k: ov["framework"][k] for k in ("id", "title", "source")},
        "latest_run": run_summary(ov["latest_run"]),
        "forecast_age_hours": None if age["age"] is None else round(age["age"].total_seconds() / 3600, 1),
        "stale": age["stale"], "expired": age["expired"], "ensemble_members": members,
        "basins": [{
            "id": b["id"], "name": b["name"], "state": b["state"], "level": b["level"]["number"],
            "level_name": b["level"]["name"], "since_utc": b["since_utc"], "level_changed_utc": b["changed_utc"],
            "has_forecast": b["has_forecast"],
            "p_max_within_horizon": {str(k): v for k, v in b["p_max"].items()},
            "observed": ({"day": b["observed"]["day"], "day_start_utc": b["observed"]["day_start_utc"],
                          "mean_ugL": b["observed"]["mean"], "n": b["observed"]["n"]} if b["observed"] else None),
        } for b in ov["basins"]],
    }


STATUS_COLUMNS = ["water_body_id", "basin_id", "basin_name", "state", "level", "level_name", "since_utc",
                  "level_changed_utc", "has_forecast", "run_id", "analysis_utc", "stale", "expired",
                  "observed_day", "observed_mean_ugL"]


def status_rows(payload: dict) -> list[dict]:
    run = payload["latest_run"] or {}
    rows = []
    for b in payload["basins"]:
        row = {"water_body_id": payload["id"], "basin_id": b["id"], "basin_name": b["name"], "state": b["state"],
               "level": b["level"], "level_name": b["level_name"], "since_utc": b["since_utc"],
               "level_changed_utc": b["level_changed_utc"], "has_forecast": b["has_forecast"],
               "run_id": run.get("id"), "analysis_utc": run.get("analysis_utc"), "stale": payload["stale"],
               "expired": payload["expired"],
               "observed_day": b["observed"]["day"] if b["observed"] else None,
               "observed_mean_ugL": b["observed"]["mean_ugL"] if b["observed"] else None}
        for level, p in b["p_max_within_horizon"].items():
            row[f"p_max_level_{level}"] = p
        rows.append(row)
    return rows


def status_columns(cfg) -> list[str]:
    top = max(len(wb.alerts.levels) for wb in cfg.water_bodies)
    return STATUS_COLUMNS + [f"p_max_level_{n}" for n in range(1, top + 1)]
