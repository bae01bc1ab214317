"""JSON health of the service: ``GET /api/v1/health`` and ``GET /api/v1/jobs``.

Both read through :mod:`monitor.store.health`. ``/health`` answers 200
when healthy and 503 with the list of problems otherwise, so an external
monitor can poll it; ``/jobs`` lists the recorded job runs, newest first.
"""

from __future__ import annotations

import datetime as dt

from flask import Blueprint, abort, jsonify, request

from monitor.store import health as store_health

health_api = Blueprint("health", __name__, url_prefix="/api/v1")


def _q(name: str, schema: dict, description: str) -> dict:
    return {"name": name, "in": "query", "required": False, "schema": schema, "description": description}


#: The endpoints' descriptions for the OpenAPI document (paths items).
OPENAPI_PATH = {
    "/api/v1/health": {"get": {
        "summary": "The service's health: failing jobs and stale feeds",
        "parameters": [_q("max_failures", {"type": "integer", "minimum": 1, "maximum": 100},
                          "failed runs in a row that make a job a problem"),
                       _q("stale_hours", {"type": "integer", "minimum": 1, "maximum": 8760},
                          "hours without a reading that make a feed stale")],
        "responses": {"200": {"description": "healthy", "content": {"application/json": {"schema": {"type": "object"}}}},
                      "400": {"description": "a parameter out of range"},
                      "503": {"description": "problems, listed", "content": {"application/json": {
                          "schema": {"type": "object"}}}}}}},
    "/api/v1/jobs": {"get": {
        "summary": "Recorded job runs, newest first",
        "parameters": [_q("water_body", {"type": "string"}, "only this water body's runs"),
                       _q("job", {"enum": ["ingest", "cycle", "send", "webhooks"]}, "only this job"),
                       _q("limit", {"type": "integer", "minimum": 1, "maximum": 500}, "runs per page"),
                       _q("before", {"type": "integer", "minimum": 0}, "runs older than this id")],
        "responses": {"200": {"description": "job runs", "content": {"application/json": {"schema": {"type": "object"}}}},
                      "400": {"description": "a parameter out of range"},
                      "404": {"description": "no such water body"}}}},
}


def _int_arg(name: str, default: int, low: int, high: int) -> int:
    raw = request.args.get(name)
    if raw is None:
        return default
    if not raw.isdigit() or not low <= int(raw) <= high:
        abort(400, description=f"{name} must be a whole number from {low} to {high}")
    return int(raw)


@health_api.get("/health")
def health():
    from web import get_config, get_engine, now

    max_failures = _int_arg("max_failures", store_health.DEFAULT_MAX_FAILURES, 1, 100)
    stale_hours = _int_arg("stale_hours", int(store_health.DEFAULT_STALE_AFTER.total_seconds() // 3600), 1, 24 * 365)
    report = store_health.health_report(get_engine(), get_config(), now=now(), wall_now=dt.datetime.now(dt.UTC),
                                        max_failures=max_failures, stale_after=dt.timedelta(hours=stale_hours))
    response = jsonify(report)
    response.status_code = 200 if report["ok"] else 503
    response.headers["Cache-Control"] = "no-store"
    return response


@health_api.get("/jobs")
def jobs():
    from web import get_config, get_engine

    water_body = request.args.get("water_body")
    if water_body is not None and water_body not in {wb.id for wb in get_config().water_bodies}:
        abort(404, description=f"There is no water body {water_body!r}.")
    job = request.args.get("job")
    if job is not None and job not in ("ingest", "cycle", "send", "webhooks"):
        abort(400, description="job must be one of ingest, cycle, send, webhooks")
    limit = _int_arg("limit", 50, 1, 500)
    before = request.args.get("before")
    if before is not None and (not before.isdigit() or int(before) > 2**62):
        abort(400, description="before must be a job run id")
    runs = store_health.job_runs_list(get_engine(), job=job, water_body=water_body, limit=limit,
                                      before_id=int(before) if before else None)
    return jsonify({"job_runs": runs, "next_before": runs[-1]["id"] if len(runs) == limit else None})
