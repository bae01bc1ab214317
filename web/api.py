"""The JSON and CSV API (mounted at ``/api/v1``), described by ``/api/v1/openapi.json``.

Every endpoint takes ``format`` (``json`` or, where the answer is a table,
``csv``) and only the parameters it documents; anything else answers 400
with a message, as do numbers out of range and malformed times. Lists of
runs, analyses and alert events are paged (``limit``, ``offset``; the
answer's ``paging`` object and ``Link`` header name the next page). Errors
are JSON ``{"error": {"status", "name", "message"}}`` with the matching
status code. Payload shapes: :mod:`web.api_payloads`.
"""

from __future__ import annotations

from flask import Blueprint, abort, current_app, jsonify, request, url_for

from monitor.alerting.levels import level_label
from monitor.forecasting.quantities import QUANTITIES, UNITS
from monitor.store import status
from web import get_config, get_engine, listing, now, params, water_body_or_404
from web.api_payloads import (
    BASIN_COLUMNS,
    basin_rows,
    csv_answer,
    describe,
    iso,
    json_answer,
    paging,
    run_summary,
    status_columns,
    status_payload,
    status_rows,
)

api = Blueprint("api", __name__)

#: Paging of /runs and /alert-events: default and largest page [items].
RUNS_DEFAULT, RUNS_MAX = 30, 1000
#: Paging of /history: default and largest page [runs].
HISTORY_DEFAULT, HISTORY_MAX = 90, 1000


def _basins_arg(wb) -> list[str]:
    """The ``basin`` parameter as a list of basin ids (all of them when it is absent)."""
    ids = [b.id for b in wb.basins]
    basin = request.args.get("basin")
    if basin is None:
        return ids
    if basin not in ids:
        abort(404, description=f"{wb.id} has no basin {basin[:60]!r}; basins: {', '.join(ids)}")
    return [basin]


def _page(default: int, maximum: int) -> tuple[int, int]:
    limit = params.integer("limit", default, minimum=1, maximum=maximum)
    offset = params.integer("offset", 0, minimum=0, maximum=status.MAX_ID)
    return limit, offset


def _members() -> int:
    return get_config().filter.members


@api.route("/")
def index():
    params.accept("format")
    params.fmt(("json",))
    return json_answer({"openapi": url_for("api.openapi"), "endpoints": {
        "water_bodies": url_for("api.water_bodies"),
        "status": url_for("api.all_status"),
        "water_body": "/api/v1/water-bodies/{id}",
        "water_body_status": "/api/v1/water-bodies/{id}/status",
        "latest_forecast": "/api/v1/water-bodies/{id}/forecast",
        "runs": "/api/v1/water-bodies/{id}/runs",
        "run_forecast": "/api/v1/water-bodies/{id}/runs/{run_id}/forecast",
        "history": "/api/v1/water-bodies/{id}/history",
        "alert_events": "/api/v1/water-bodies/{id}/alert-events",
        "push": "/api/v1/push/{feed}",
    }})


@api.route("/openapi.json")
def openapi():
    params.accept()
    response = jsonify(current_app.extensions["bloomline"]["openapi"]())
    response.headers["Cache-Control"] = "public, max-age=300"
    return response


@api.route("/water-bodies")
def water_bodies():
    params.accept("format", *listing.PARAMETERS)
    cfg = get_config()
    fmt = params.fmt()
    chosen = listing.listing(cfg, get_engine())
    if fmt == "csv":
        return csv_answer([r for wb in chosen.bodies for r in basin_rows(wb)], BASIN_COLUMNS, "water-bodies.csv",
                          headers=chosen.link_header())
    return json_answer({"water_bodies": [describe(wb) for wb in chosen.bodies], "summary": chosen.summary(),
                        "paging": chosen.paging()}, chosen.link_header())


@api.route("/water-bodies/<water_body_id>")
def water_body(water_body_id: str):
    params.accept("format")
    wb = water_body_or_404(water_body_id)
    if params.fmt() == "csv":
        return csv_answer(basin_rows(wb), BASIN_COLUMNS, f"{wb.id}.csv")
    return json_answer(describe(wb))


@api.route("/status")
def all_status():
    params.accept("format", *listing.PARAMETERS)
    fmt = params.fmt()
    cfg, engine = get_config(), get_engine()
    chosen = listing.listing(cfg, engine)
    payloads = [status_payload(status.water_body_overview(engine, cfg, wb, now=now()), _members())
                for wb in chosen.bodies]
    if fmt == "csv":
        return csv_answer([r for p in payloads for r in status_rows(p)], status_columns(cfg), "status.csv",
                          headers=chosen.link_header())
    return json_answer({"water_bodies": payloads, "summary": chosen.summary(), "paging": chosen.paging()},
                       chosen.link_header())


@api.route("/water-bodies/<water_body_id>/status")
def water_body_status(water_body_id: str):
    params.accept("format")
    wb = water_body_or_404(water_body_id)
    fmt = params.fmt()
    payload = status_payload(status.water_body_overview(get_engine(), get_config(), wb, now=now()), _members())
    if fmt == "csv":
        return csv_answer(status_rows(payload), status_columns(get_config()), f"{wb.id}-status.csv")
    return json_answer(payload)


FORECAST_COLUMNS = ["run_id", "analysis_utc", "basin_id", "valid_utc", "lead_days", "quantity", "statistic", "value"]


def _forecast_answer(wb, run: dict):
    params.accept("basin", "quantity", "format")
    fmt = params.fmt()
    basins = _basins_arg(wb)
    quantity = params.choice("quantity", QUANTITIES, None)
    rows = []
    for v in status.run_values(get_engine(), run["id"], quantity=quantity):
        if v["basin_id"] in basins:
            rows.append({"run_id": run["id"], "analysis_utc": run["analysis_utc"],
                         "lead_days": round((v["valid_utc"] - run["analysis_utc"]) / status.DAY), **v})
    if fmt == "csv":
        return csv_answer(rows, FORECAST_COLUMNS, f"{wb.id}-forecast-{run['analysis_utc']:%Y%m%d}.csv")
    per_basin: dict[str, dict] = {b: {} for b in basins}
    for r in rows:
        series = per_basin[r["basin_id"]].setdefault(r["quantity"], {})
        day = series.setdefault(iso(r["valid_utc"]), {"valid_utc": r["valid_utc"], "lead_days": r["lead_days"]})
        day[r["statistic"]] = r["value"]
    return json_answer({
        "water_body_id": wb.id, "run": run_summary(run), "ensemble_members": _members(),
        "units": {**UNITS, "p_level_<n>": "probability 0-1 (fraction of ensemble members)"},
        "levels": status.framework_info(wb)["levels"],
        "basins": {b: {q: list(days.values()) for q, days in per_basin[b].items()} for b in basins},
    })


@api.route("/water-bodies/<water_body_id>/forecast")
def latest_forecast(water_body_id: str):
    wb = water_body_or_404(water_body_id)
    params.accept("basin", "quantity", "format")
    run = status.latest_run(get_engine(), wb.id)
    if run is None:
        abort(404, description=f"no forecast has been issued for {wb.id} yet")
    return _forecast_answer(wb, run)


@api.route("/water-bodies/<water_body_id>/runs/<int:run_id>/forecast")
def run_forecast(water_body_id: str, run_id: int):
    wb = water_body_or_404(water_body_id)
    params.accept("basin", "quantity", "format")
    run_id = params.path_id(str(run_id), "run id")
    run = status.get_run(get_engine(), run_id)
    if run is None or run["water_body_id"] != wb.id:
        abort(404, description=f"{wb.id} has no forecast run {run_id}")
    return _forecast_answer(wb, run)


RUN_COLUMNS = ["id", "analysis_utc", "created_at", "status", "message"]


@api.route("/water-bodies/<water_body_id>/runs")
def runs(water_body_id: str):
    wb = water_body_or_404(water_body_id)
    params.accept("start", "end", "limit", "offset", "include", "format")
    fmt = params.fmt()
    limit, offset = _page(RUNS_DEFAULT, RUNS_MAX)
    diagnostics = params.choice("include", ("diagnostics",), None) == "diagnostics"
    start, end = params.time("start"), params.time("end")
    engine = get_engine()
    found = status.list_runs(engine, wb.id, start=start, end=end, limit=limit, offset=offset)
    page, link = paging(limit, offset, status.count_runs(engine, wb.id, start=start, end=end))
    if fmt == "csv":
        return csv_answer(found, RUN_COLUMNS, f"{wb.id}-runs.csv", link)
    out = []
    for r in found:
        s = run_summary(r, diagnostics=diagnostics)
        s["forecast"] = url_for("api.run_forecast", water_body_id=wb.id, run_id=r["id"])
        out.append(s)
    return json_answer({"water_body_id": wb.id, "runs": out, "paging": page}, link)


HISTORY_COLUMNS = ["run_id", "analysis_utc", "status", "basin_id", "quantity", *status.STATISTICS]


@api.route("/water-bodies/<water_body_id>/history")
def history(water_body_id: str):
    wb = water_body_or_404(water_body_id)
    params.accept("basin", "quantity", "start", "end", "limit", "offset", "format")
    fmt = params.fmt()
    quantity = params.choice("quantity", QUANTITIES, status.QUANTITY)
    start, end = params.time("start"), params.time("end")
    limit, offset = _page(HISTORY_DEFAULT, HISTORY_MAX)
    basins = _basins_arg(wb)
    engine = get_engine()
    rows = []
    for basin in basins:
        for h in status.analysis_history(engine, wb.id, basin, quantity=quantity, start=start, end=end,
                                         limit=limit, offset=offset):
            rows.append({"basin_id": basin, "quantity": quantity, **h})
    page, link = paging(limit, offset, status.count_runs(engine, wb.id, start=start, end=end))
    if fmt == "csv":
        return csv_answer(rows, HISTORY_COLUMNS, f"{wb.id}-analysis-history.csv", link)
    return json_answer({"water_body_id": wb.id, "quantity": quantity, "analyses": rows, "paging": page}, link)


EVENT_COLUMNS = ["id", "water_body_id", "basin_id", "time_utc", "from_level", "to_level", "probability",
                 "observed_ugL", "reason"]


@api.route("/water-bodies/<water_body_id>/alert-events")
def alert_events(water_body_id: str):
    wb = water_body_or_404(water_body_id)
    params.accept("basin", "start", "end", "limit", "offset", "format")
    fmt = params.fmt()
    basins = _basins_arg(wb)
    limit, offset = _page(RUNS_DEFAULT, RUNS_MAX)
    basin = basins[0] if request.args.get("basin") is not None else None
    everything = status.list_alert_events(get_engine(), wb.id, basin_id=basin, start=params.time("start"),
                                          end=params.time("end"))
    events = everything[offset:offset + limit]
    page, link = paging(limit, offset, len(everything))
    if fmt == "csv":
        return csv_answer(events, EVENT_COLUMNS, f"{wb.id}-alert-events.csv", link)
    for e in events:
        e["from_level_name"] = level_label(wb, e["from_level"])
        e["to_level_name"] = level_label(wb, e["to_level"])
    return json_answer({"water_body_id": wb.id, "events": events, "paging": page}, link)
