"""What-if for operators: the API endpoint, the page with its form, and the scenario chart.

``POST /api/v1/water-bodies/<id>/what-if`` takes a JSON request
(:func:`monitor.scenarios.request.parse_request`) and answers with the scenario
(:func:`monitor.scenarios.run.run_what_if`) and the process model's recent skill
(:func:`monitor.scenarios.skill.recent_skill`); errors come as JSON
``{"caution", "error": {"status", "name", "message"}}`` with the matching status code.
``GET /water-bodies/<id>/what-if?…`` is the page: a form whose fields are the address's query,
so a scenario can be bookmarked and shared. A scenario never writes to the store.

Requests are bounded: the request's members and horizon (:mod:`monitor.scenarios.request`), and
the number of scenarios computed per minute, per client and in all (``BLOOMLINE_WHATIF_PER_MINUTE``
and ``BLOOMLINE_WHATIF_TOTAL_PER_MINUTE`` in the Flask config; 429 with ``Retry-After`` beyond).
A computed scenario is kept for a few minutes, so the page's charts do not compute it again.
"""

from __future__ import annotations

import collections
import json
import threading
import time

from flask import Blueprint, Response, abort, current_app, jsonify, render_template, request

from monitor.alerting.caution import CAUTION
from monitor.scenarios.request import KEYS, MAX_HORIZON_DAYS, RequestError, parse_request
from monitor.scenarios.run import MODEL_NOTE, SCENARIO_NOTICE, NoAnalysis, outlet_basin, run_what_if
from monitor.scenarios.skill import recent_skill
from web import get_config, get_engine, now
from web.plots import FORMATS
from web.whatif_plots import whatif_chart

whatif = Blueprint("whatif", __name__)

PER_MINUTE = 10          # scenarios computed per client and minute
TOTAL_PER_MINUTE = 30    # scenarios computed per minute in all
RESULT_SECONDS = 300.0   # how long a computed scenario is kept
SKILL_SECONDS = 600.0    # how long the recent skill of a water body is kept
MAX_BODY_BYTES = 64 * 1024
#: The form's fields per action kind: ``<kind>_<key>`` in the page's address.
FORM_KEYS = {kind: keys["required"] + keys["optional"] for kind, keys in KEYS.items()}
EXTENSION = "bloomline_whatif"

#: The endpoint's description for the OpenAPI document (paths item).
OPENAPI_PATH = {
    "/api/v1/water-bodies/{water_body_id}/what-if": {"post": {
        "summary": "What-if scenario: today's analysis run with and without operator actions",
        "description": SCENARIO_NOTICE + " " + MODEL_NOTE,
        "parameters": [{"name": "water_body_id", "in": "path", "required": True, "schema": {"type": "string"}}],
        "requestBody": {"required": True, "content": {"application/json": {"schema": {
            "type": "object", "required": ["actions"], "additionalProperties": False,
            "properties": {
                "horizon_days": {"type": "integer", "minimum": 1, "maximum": MAX_HORIZON_DAYS},
                "members": {"type": "integer", "minimum": 2},
                "actions": {"type": "array", "minItems": 1, "items": {"type": "object", "required": ["kind"],
                            "properties": {"kind": {"enum": list(KEYS)}}}},
            }}}}},
        "responses": {
            "200": {"description": "the scenario: per basin and day quantiles and alert-level probabilities "
                                   "without and with the actions, the paired difference (5, 50, 95 %), the "
                                   "water and loads the actions move, the model's recent skill, the caution"},
            "400": {"description": "the request cannot be run (the message says why)"},
            "404": {"description": "no such water body, or no analysis stored yet"},
            "413": {"description": "request body too large"},
            "429": {"description": "too many scenarios this minute (see Retry-After)"},
        }}},
}


class TooMany(Exception):
    def __init__(self, retry_after_s: int):
        super().__init__(f"too many what-if scenarios this minute; try again in {retry_after_s} s")
        self.retry_after_s = retry_after_s


class _RateLimit:
    """Sliding one-minute windows: per client and in all."""

    def __init__(self):
        self._lock = threading.Lock()
        self._seen: dict[str, collections.deque] = collections.defaultdict(collections.deque)
        self._all: collections.deque = collections.deque()

    def take(self, client: str, per_client: int, total: int) -> None:
        t = time.monotonic()
        with self._lock:
            mine = self._seen[client]
            for q in (mine, self._all):
                while q and t - q[0] >= 60.0:
                    q.popleft()
            for q, limit in ((mine, per_client), (self._all, total)):
                if len(q) >= limit:
                    raise TooMany(max(1, int(60.0 - (t - q[0])) + 1))
            mine.append(t)
            self._all.append(t)


class _Kept:
    """A small store of computed results that expire."""

    def __init__(self, size: int = 32):
        self._lock = threading.Lock()
        self._items: collections.OrderedDict = collections.OrderedDict()
        self._size = size

    def get(self, key, max_age_s: float):
        with self._lock:
            item = self._items.get(key)
            if item is None or time.monotonic() - item[0] > max_age_s:
                return None
            self._items.move_to_end(key)
            return item[1]

    def put(self, key, value) -> None:
        with self._lock:
            self._items[key] = (time.monotonic(), value)
            self._items.move_to_end(key)
            while len(self._items) > self._size:
                self._items.popitem(last=False)


@whatif.record_once
def _setup(state) -> None:
    state.app.extensions[EXTENSION] = {"limit": _RateLimit(), "results": _Kept(), "skill": _Kept(8)}


def _state() -> dict:
    return current_app.extensions[EXTENSION]


def _water_body(water_body_id: str):
    try:
        return get_config().water_body(water_body_id)
    except KeyError:
        return None


def _skill(wb) -> dict:
    kept = _state()["skill"]
    value = kept.get(wb.id, SKILL_SECONDS)
    if value is None:
        value = recent_skill(get_engine(), get_config(), wb, now=now())
        kept.put(wb.id, value)
    return value


def scenario(wb, data) -> dict:
    """The scenario of request ``data`` for ``wb`` with the recent skill (kept a few minutes).
    RequestError, NoAnalysis or TooMany when it cannot be given."""
    req = parse_request(data, wb)
    key = (wb.id, json.dumps(req.as_dict(), sort_keys=True))
    state = _state()
    result = state["results"].get(key, RESULT_SECONDS)
    if result is None:
        cfg = current_app.config
        state["limit"].take(request.remote_addr or "?", cfg.get("BLOOMLINE_WHATIF_PER_MINUTE", PER_MINUTE),
                            cfg.get("BLOOMLINE_WHATIF_TOTAL_PER_MINUTE", TOTAL_PER_MINUTE))
        result = run_what_if(get_engine(), get_config(), wb, req, now=now())
        result["skill"] = _skill(wb)
        state["results"].put(key, result)
    return result


# --------------------------------------------------------------------------
# API


def _error(status: int, name: str, message: str, headers: dict | None = None):
    response = jsonify({"caution": CAUTION, "error": {"status": status, "name": name, "message": message}})
    response.status_code = status
    response.headers["X-Bloomline-Caution"] = CAUTION
    for k, v in (headers or {}).items():
        response.headers[k] = v
    return response


@whatif.route("/api/v1/water-bodies/<water_body_id>/what-if", methods=["POST"])
def api_what_if(water_body_id: str):
    wb = _water_body(water_body_id)
    if wb is None:
        return _error(404, "Not Found", f"There is no water body {water_body_id!r}.")
    if (request.content_length or 0) > MAX_BODY_BYTES:
        return _error(413, "Payload Too Large", f"a what-if request is at most {MAX_BODY_BYTES} bytes")
    data = request.get_json(silent=True)
    if data is None:
        return _error(400, "Bad Request", "send the what-if as a JSON object (Content-Type: application/json) "
                                          "with 'actions'")
    try:
        result = scenario(wb, data)
    except RequestError as exc:
        return _error(400, "Bad Request", str(exc))
    except NoAnalysis as exc:
        return _error(404, "Not Found", str(exc))
    except TooMany as exc:
        return _error(429, "Too Many Requests", str(exc), {"Retry-After": str(exc.retry_after_s)})
    response = jsonify(result)
    response.headers["X-Bloomline-Caution"] = CAUTION
    return response


# --------------------------------------------------------------------------
# Page and chart


def form_request(args) -> dict | None:
    """The request of the page's query (``<kind>_<key>`` fields; an action counts when its basin or
    inflow is chosen); None when no action is chosen."""
    actions = []
    for kind, keys in FORM_KEYS.items():
        if args.get(f"{kind}_{keys[0]}"):
            actions.append({"kind": kind, **{k: args.get(f"{kind}_{k}", "") for k in keys}})
    if not actions:
        return None
    return {"actions": actions, "horizon_days": args.get("horizon_days") or None}


def _form_values(wb, args) -> dict:
    """The form's fields: the query's values, else the defaults."""
    values = {"horizon_days": args.get("horizon_days") or str(min(wb.alerts.horizon_days, MAX_HORIZON_DAYS))}
    for kind, keys in FORM_KEYS.items():
        for k in keys:
            default = {"from_day": "1", "days": "3"}.get(k, "")
            values[f"{kind}_{k}"] = args.get(f"{kind}_{k}", default)
    return values


@whatif.app_template_filter("iso_utc")
def _iso_utc(text: str) -> str:
    """``2026-08-20T00:00:00Z`` → ``2026-08-20 00:00 UTC``."""
    return text[:16].replace("T", " ") + " UTC"


@whatif.route("/water-bodies/<water_body_id>/what-if")
def page(water_body_id: str):
    wb = _water_body(water_body_id)
    if wb is None:
        abort(404, description=f"There is no water body {water_body_id!r}.")
    data = form_request(request.args)
    result, error, status, headers = None, None, 200, {}
    if data is not None:
        try:
            result = scenario(wb, data)
        except RequestError as exc:
            error, status = str(exc), 400
        except NoAnalysis as exc:
            error, status = str(exc), 404
        except TooMany as exc:
            error, status, headers = str(exc), 429, {"Retry-After": str(exc.retry_after_s)}
    body = render_template("whatif.html", wb=wb, form=_form_values(wb, request.args), result=result, error=error,
                           notice=SCENARIO_NOTICE, model_note=MODEL_NOTE, intake_now=outlet_basin(wb),
                           max_horizon=MAX_HORIZON_DAYS, query=request.query_string.decode(),
                           basin_names={b.id: b.name for b in wb.basins})
    return body, status, headers


@whatif.route("/water-bodies/<water_body_id>/what-if/<basin_id>.<fmt>")
def chart(water_body_id: str, basin_id: str, fmt: str):
    wb = _water_body(water_body_id)
    if wb is None or basin_id not in [b.id for b in wb.basins] or fmt not in FORMATS:
        abort(404, description="No such what-if chart.")
    data = form_request(request.args)
    if data is None:
        abort(400, description="The chart's address holds no action.")
    try:
        result = scenario(wb, data)
    except (RequestError, NoAnalysis) as exc:
        abort(400 if isinstance(exc, RequestError) else 404, description=str(exc))
    except TooMany as exc:
        abort(Response(str(exc), status=429, headers={"Retry-After": str(exc.retry_after_s)}))
    basin = next(b for b in result["basins"] if b["id"] == basin_id)
    periods = [(a["start_utc"], a["end_utc"]) for a in result["actions"] if "end_utc" in a]
    body = whatif_chart(title=f"{basin['name']}, {wb.name} — what-if scenario, not a forecast",
                        rows=basin["quantities"]["cyanobacteria_chlorophyll"], levels=result["levels"],
                        periods=periods, fmt=fmt)
    return Response(body, mimetype=FORMATS[fmt], headers={"Cache-Control": "no-cache"})
