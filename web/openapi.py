"""The OpenAPI 3.1 document of API v1, served at ``/api/v1/openapi.json``.

It is written here by hand beside the views (:mod:`web.api`, :mod:`web.push`)
and checked against the served app by the tests (schemathesis finds no
answer the document does not allow). Other blueprints add their own paths
through ``app.extensions["bloomline"]["openapi_paths"]`` (path → path item).
"""

from __future__ import annotations

import copy

from monitor.alerting.caution import CAUTION
from monitor.forecasting.quantities import QUANTITIES
from monitor.store.status import MAX_ID
from web.api import HISTORY_DEFAULT, HISTORY_MAX, RUNS_DEFAULT, RUNS_MAX
from web.listing import LEVEL_MAX, PER_PAGE_DEFAULT, PER_PAGE_MAX
from web.security import MAX_BODY_BYTES

T = {"type": "string", "format": "date-time"}
T_OR_NULL = {"type": ["string", "null"], "format": "date-time"}
NUM_OR_NULL = {"type": ["number", "null"]}


def _ref(name: str) -> dict:
    return {"$ref": f"#/components/schemas/{name}"}


def _obj(required: list[str], **props) -> dict:
    return {"type": "object", "required": required, "properties": props}


SCHEMAS = {
    "Error": _obj(["error"], error=_obj(["status", "message"], status={"type": "integer"}, name={"type": "string"},
                                        message={"type": "string"})),
    "Caution": {"type": "string", "description": "Forecasts are estimates; authorities' advisories prevail.",
                "const": CAUTION},
    "Level": _obj(["number", "name"], number={"type": "integer"}, name={"type": "string"},
                  chlorophyll_ugL=NUM_OR_NULL, meaning={"type": "string"}),
    "Framework": _obj(["id", "title", "source"], id={"type": "string"}, title={"type": "string"},
                      source={"type": "string"}, levels={"type": "array", "items": _ref("Level")},
                      warn_probability={"type": "number"}, horizon_days={"type": "integer"},
                      clear_after_cycles={"type": "integer"}),
    "Basin": _obj(["id", "name", "flows_to"], id={"type": "string"}, name={"type": "string"},
                  volume_m3={"type": "number"}, mean_depth_m={"type": "number"}, area_m2={"type": "number"},
                  flows_to={"type": "string"}),
    "WaterBody": _obj(["id", "name", "use", "timezone", "basins", "framework", "links"],
                      caution=_ref("Caution"), id={"type": "string"}, name={"type": "string"},
                      use={"type": "string", "enum": ["drinking-water", "recreation"]},
                      timezone={"type": "string"}, region={"type": ["string", "null"]},
                      basins={"type": "array", "items": _ref("Basin")},
                      framework=_ref("Framework"), links={"type": "object", "additionalProperties": {"type": "string"}}),
    "RunSummary": _obj(["id", "analysis_utc", "created_at", "status", "message"], id={"type": "integer"},
                       analysis_utc=T, created_at=T,
                       status={"type": "string", "enum": ["ok", "no_data", "degraded", "failed"]},
                       message={"type": "string"}, diagnostics={"type": "object"},
                       forecast={"type": "string", "description": "link to the run's forecast"}),
    "Paging": _obj(["limit", "offset", "total", "next", "previous"], limit={"type": "integer", "minimum": 1},
                   offset={"type": "integer", "minimum": 0}, total={"type": "integer", "minimum": 0},
                   next={"type": ["string", "null"]}, previous={"type": ["string", "null"]}),
    "PageLinks": _obj(["page", "per_page", "total", "pages", "next", "previous"],
                      page={"type": "integer", "minimum": 1}, per_page={"type": "integer", "minimum": 1},
                      total={"type": "integer", "minimum": 0}, pages={"type": "integer", "minimum": 1},
                      next={"type": ["string", "null"]}, previous={"type": ["string", "null"]}),
    "LevelSummary": _obj(["water_bodies", "region", "by_level"], water_bodies={"type": "integer", "minimum": 0},
                         region={"type": ["string", "null"]},
                         by_level={"type": "object", "description": "water bodies per current alert level (0: none)",
                                   "additionalProperties": {"type": "integer", "minimum": 0}}),
    "BasinStatus": _obj(
        ["id", "name", "state", "level", "level_name", "since_utc", "has_forecast", "p_max_within_horizon", "observed"],
        id={"type": "string"}, name={"type": "string"},
        state={"type": "string", "enum": ["no_forecast", "no_level", "level"]},
        level={"type": "integer", "minimum": 0}, level_name={"type": "string"},
        since_utc=T_OR_NULL | {"description": "when the basin entered alert (null at level 0)"},
        level_changed_utc=T_OR_NULL, has_forecast={"type": "boolean"},
        p_max_within_horizon={"type": "object", "additionalProperties": NUM_OR_NULL},
        observed={"oneOf": [{"type": "null"}, _obj(["day", "day_start_utc", "mean_ugL", "n"],
                                                  day={"type": "string", "format": "date"}, day_start_utc=T,
                                                  mean_ugL={"type": "number"}, n={"type": "integer"})]}),
    "WaterBodyStatus": _obj(
        ["id", "name", "use", "timezone", "framework", "latest_run", "stale", "expired", "ensemble_members", "basins"],
        caution=_ref("Caution"), id={"type": "string"}, name={"type": "string"}, use={"type": "string"},
        timezone={"type": "string"}, framework={"type": "object"},
        latest_run={"oneOf": [{"type": "null"}, _ref("RunSummary")]},
        forecast_age_hours=NUM_OR_NULL, stale={"type": "boolean"}, expired={"type": "boolean"},
        ensemble_members={"type": "integer", "minimum": 1},
        basins={"type": "array", "items": _ref("BasinStatus")}),
    "Forecast": _obj(["caution", "water_body_id", "run", "units", "levels", "basins"], caution=_ref("Caution"),
                     water_body_id={"type": "string"}, run=_ref("RunSummary"), ensemble_members={"type": "integer"},
                     units={"type": "object"}, levels={"type": "array", "items": _ref("Level")},
                     basins={"type": "object", "additionalProperties": {
                         "type": "object", "additionalProperties": {"type": "array", "items": _obj(
                             ["valid_utc", "lead_days"], valid_utc=T, lead_days={"type": "integer"})}}}),
    "AlertEvent": _obj(["id", "water_body_id", "basin_id", "time_utc", "from_level", "to_level"],
                       id={"type": "integer"}, water_body_id={"type": "string"}, basin_id={"type": "string"},
                       time_utc=T, from_level={"type": "integer"}, to_level={"type": "integer"},
                       probability=NUM_OR_NULL, observed_ugL=NUM_OR_NULL, reason={"type": "string"},
                       from_level_name={"type": "string"}, to_level_name={"type": "string"}),
    "Analysis": _obj(["run_id", "analysis_utc", "status", "basin_id", "quantity"], run_id={"type": "integer"},
                     analysis_utc=T, status={"type": "string"}, basin_id={"type": "string"},
                     quantity={"type": "string"}),
    "PushResult": _obj(["caution", "status", "received", "accepted", "rejected", "duplicate", "rejections"],
                       caution=_ref("Caution"), batch_id={"type": ["integer", "null"]},
                       status={"type": "string", "enum": ["ok", "partial", "rejected", "failed"]},
                       received={"type": "integer"}, accepted={"type": "integer"}, flagged={"type": "integer"},
                       rejected={"type": "integer"}, duplicate={"type": "integer"}, message={"type": "string"},
                       rejections={"type": "array", "items": _obj(
                           ["row", "station", "column", "reason"], row={"type": ["integer", "null"]},
                           station={"type": ["string", "null"]}, column={"type": ["string", "null"]},
                           reason={"type": "string"}, raw={"type": "string"})}),
}


def _param(name: str, where: str, schema: dict, description: str, required: bool = False) -> dict:
    return {"name": name, "in": where, "required": required or where == "path", "schema": schema,
            "description": description}


WB = _param("water_body_id", "path", {"type": "string"}, "water body id")
BASIN = _param("basin", "query", {"type": "string"}, "one basin's id (default: every basin)")
QUANTITY = _param("quantity", "query", {"type": "string", "enum": list(QUANTITIES)}, "forecast quantity")
START = _param("start", "query", {"type": "string", "format": "date-time"}, "from this time (ISO 8601; UTC if no offset)")
END = _param("end", "query", {"type": "string", "format": "date-time"}, "up to this time (ISO 8601)")
OFFSET = _param("offset", "query", {"type": "integer", "minimum": 0, "maximum": MAX_ID}, "items to skip (paging)")


def _limit(default: int, maximum: int) -> dict:
    return _param("limit", "query", {"type": "integer", "minimum": 1, "maximum": maximum, "default": default},
                  "items per page")


def _format(csv: bool = True) -> dict:
    return _param("format", "query", {"type": "string", "enum": ["json", "csv"] if csv else ["json"],
                                      "default": "json"}, "answer format")


def _error(description: str) -> dict:
    return {"description": description, "content": {"application/json": {"schema": _ref("Error")}}}


def _get(summary: str, parameters: list, schema: dict, *, csv: bool = True, not_found: bool = True) -> dict:
    content = {"application/json": {"schema": schema}}
    if csv:
        content["text/csv"] = {"schema": {"type": "string"},
                               "description": "CSV with the caution as a first comment line"}
    responses = {"200": {"description": "OK", "content": content},
                 "400": _error("a parameter is unknown, repeated, malformed or out of range")}
    if not_found:
        responses["404"] = _error("no such water body, basin, run or forecast")
    return {"get": {"summary": summary, "parameters": parameters + [_format(csv)], "responses": responses}}


def _list(key: str, item: str) -> dict:
    return _obj(["caution", key, "paging"], caution=_ref("Caution"), water_body_id={"type": "string"},
                **{key: {"type": "array", "items": _ref(item)}}, paging=_ref("Paging"))


LISTING = [
    _param("page", "query", {"type": "integer", "minimum": 1, "maximum": MAX_ID, "default": 1}, "page number"),
    _param("per_page", "query", {"type": "integer", "minimum": 1, "maximum": PER_PAGE_MAX,
                                 "default": PER_PAGE_DEFAULT}, "water bodies per page"),
    _param("level", "query", {"type": "integer", "minimum": 0, "maximum": LEVEL_MAX},
           "only water bodies whose highest current alert level over their basins is this (0: none)"),
    _param("region", "query", {"type": "string"}, "only water bodies of this configured region (another: none)"),
]

RUN_ID = _param("run_id", "path", {"type": "integer", "minimum": 1, "maximum": MAX_ID}, "forecast run id")

PATHS = {
    "/api/v1/": _get("The API's endpoints", [], {"type": "object"}, csv=False, not_found=False),
    "/api/v1/water-bodies": _get("Water bodies, their basins and alert frameworks, a page at a time", LISTING,
                                 _obj(["caution", "water_bodies", "summary", "paging"], caution=_ref("Caution"),
                                      water_bodies={"type": "array", "items": _ref("WaterBody")},
                                      summary=_ref("LevelSummary"), paging=_ref("PageLinks")), not_found=False),
    "/api/v1/water-bodies/{water_body_id}": _get("One water body", [WB], _ref("WaterBody")),
    "/api/v1/status": _get("Current status of the water bodies, a page at a time", LISTING,
                           _obj(["caution", "water_bodies", "summary", "paging"], caution=_ref("Caution"),
                                water_bodies={"type": "array", "items": _ref("WaterBodyStatus")},
                                summary=_ref("LevelSummary"), paging=_ref("PageLinks")), not_found=False),
    "/api/v1/water-bodies/{water_body_id}/status": _get("Current status of one water body", [WB],
                                                        _ref("WaterBodyStatus")),
    "/api/v1/water-bodies/{water_body_id}/forecast": _get("The newest forecast", [WB, BASIN, QUANTITY],
                                                          _ref("Forecast")),
    "/api/v1/water-bodies/{water_body_id}/runs": _get(
        "Forecast runs, newest first (diagnostics with include=diagnostics)",
        [WB, START, END, _limit(RUNS_DEFAULT, RUNS_MAX), OFFSET,
         _param("include", "query", {"type": "string", "enum": ["diagnostics"]}, "add each run's diagnostics")],
        _list("runs", "RunSummary")),
    "/api/v1/water-bodies/{water_body_id}/runs/{run_id}/forecast": _get("One run's forecast",
                                                                        [WB, RUN_ID, BASIN, QUANTITY],
                                                                        _ref("Forecast")),
    "/api/v1/water-bodies/{water_body_id}/history": _get(
        "Day 0 (the analysis) of each run, oldest first within the page of newest runs",
        [WB, BASIN, QUANTITY, START, END, _limit(HISTORY_DEFAULT, HISTORY_MAX), OFFSET],
        _list("analyses", "Analysis") | {"required": ["caution", "analyses", "paging", "quantity"]}),
    "/api/v1/water-bodies/{water_body_id}/alert-events": _get(
        "Alert level changes, newest first", [WB, BASIN, START, END, _limit(RUNS_DEFAULT, RUNS_MAX), OFFSET],
        _list("events", "AlertEvent")),
    "/api/v1/push/{feed}": {"post": {
        "summary": "Push a batch of readings to a push feed",
        "security": [{"bearer": []}, {"token": []}],
        "parameters": [_param("feed", "path", {"type": "string"}, "push feed name")],
        "requestBody": {"required": True, "content": {
            "application/json": {"schema": {"oneOf": [{"type": "array", "items": {"type": "object"}},
                                                      {"type": "object"}]}},
            "text/csv": {"schema": {"type": "string"}}}},
        "responses": {
            "200": {"description": "stored (ok or partial)",
                    "content": {"application/json": {"schema": _ref("PushResult")}}},
            "422": {"description": "every row rejected",
                    "content": {"application/json": {"schema": _ref("PushResult")}}},
            "400": _error("empty body"),
            "401": _error("missing or wrong token, or no such push feed (answered alike)"),
            "413": _error(f"body larger than {MAX_BODY_BYTES} bytes"),
            "415": _error("content type other than application/json or text/csv"),
            "500": _error("the batch failed inside the store; send it again later"),
        }}},
}


def openapi_document(app) -> dict:
    """The whole document, with the paths other blueprints registered."""
    doc = {
        "openapi": "3.1.0",
        "info": {"title": "Bloomline API", "version": "1",
                 "description": "Forecasts of harmful algal bloom alert levels, observations and alert changes. "
                                "Times are ISO 8601 UTC. " + CAUTION},
        "paths": copy.deepcopy(PATHS),
        "components": {"schemas": copy.deepcopy(SCHEMAS), "securitySchemes": {
            "bearer": {"type": "http", "scheme": "bearer"},
            "token": {"type": "apiKey", "in": "header", "name": "X-Bloomline-Token"}}},
    }
    doc["paths"].update(app.extensions["bloomline"].get("openapi_paths", {}))
    return doc
