"""HTML pages: the status of every water body, a page per water body, per basin, and the run list.

Every time is written in the water body's time zone with the zone named;
probabilities at the ensemble's resolution (:mod:`web.formatting`). Each
basin shows one of three states: no forecast yet, no alert level forecast
or an alert level. The newest forecast is marked stale when a daily run is
missing. Charts are served by :mod:`web.charts`.
"""

from __future__ import annotations

import hashlib

from flask import Blueprint, Response, abort, render_template, request, url_for

from monitor.store import station_health, status
from web import basin_or_404, get_config, get_engine, listing, now, palette, params, water_body_or_404
from web.charts import chart_urls
from web.formatting import zone
from web.schematic import layout

pages = Blueprint("pages", __name__)

#: Runs per page of the run list.
RUNS_PER_PAGE = 30
#: Alert changes shown on a water body's page.
EVENTS_SHOWN = 50


def fill_class(basin: dict) -> str:
    """The schematic's CSS class of a basin's state."""
    return "fill-none" if basin["state"] == "no_forecast" else f"fill-{basin['level']['number']}"


def _context(wb) -> dict:
    return {"wb": wb, "tz": zone(wb.timezone), "zone_name": wb.timezone}


@pages.route("/")
def index():
    cfg, engine = get_config(), get_engine()
    params.accept(*listing.PARAMETERS)
    chosen = listing.listing(cfg, engine)
    overviews = [status.water_body_overview(engine, cfg, wb, now=now()) for wb in chosen.bodies]
    return render_template("status.html", overviews=overviews, listing=chosen,
                           zones={wb.id: zone(wb.timezone) for wb in chosen.bodies})


@pages.route("/water-bodies/<water_body_id>")
def water_body(water_body_id: str):
    cfg, engine = get_config(), get_engine()
    wb = water_body_or_404(water_body_id)
    overview = status.water_body_overview(engine, cfg, wb, now=now())
    run = overview["latest_run"]
    states = {b["id"]: (fill_class(b), _state_words(b)) for b in overview["basins"]}
    charts = {b.id: chart_urls("forecast", wb, b.id, run) for b in wb.basins}
    events = status.list_alert_events(engine, wb.id, limit=EVENTS_SHOWN)
    return render_template("water_body.html", **_context(wb), overview=overview, run=run, charts=charts,
                           events=events, schematic=layout(wb, states),
                           basin_names={b.id: b.name for b in wb.basins})


def _state_words(b: dict) -> str:
    if b["state"] == "no_forecast":
        return "no forecast yet"
    return b["level"]["name"]


@pages.route("/water-bodies/<water_body_id>/basins/<basin_id>")
def basin(water_body_id: str, basin_id: str):
    cfg, engine = get_config(), get_engine()
    wb = water_body_or_404(water_body_id)
    b = basin_or_404(wb, basin_id)
    run_id = params.integer("run", None, minimum=1, maximum=status.MAX_ID)
    newest = status.latest_run(engine, wb.id)
    run = newest
    if run_id is not None:
        run = status.get_run(engine, run_id)
        if run is None or run["water_body_id"] != wb.id:
            abort(404, description=f"{wb.name} has no forecast run {run_id}.")
    overview = status.water_body_overview(engine, cfg, wb, now=now(), run=run)
    current = next(x for x in overview["basins"] if x["id"] == b.id)
    t = now()
    table = status.forecast_series(engine, run, b.id) if run is not None else []
    return render_template(
        "basin.html", **_context(wb), basin=b, overview=overview, run=run, newest=newest, current=current,
        neighbours=status.run_neighbours(engine, run) if run is not None else {"previous": None, "next": None},
        table=table, events=status.list_alert_events(engine, wb.id, basin_id=b.id, limit=EVENTS_SHOWN),
        charts={"forecast": chart_urls("forecast", wb, b.id, run), "readings": chart_urls("readings", wb, b.id, run)},
        health=station_health.station_health(engine, cfg, wb, b.id, now=t, run=newest),
        others=station_health.other_readings(engine, cfg, wb.id, b.id, now=t),
        flag_names=station_health.FLAG_NAMES, health_days=station_health.HEALTH_DAYS)


@pages.route("/water-bodies/<water_body_id>/runs")
def runs(water_body_id: str):
    wb = water_body_or_404(water_body_id)
    engine = get_engine()
    page = params.integer("page", 1, minimum=1, maximum=1_000_000)
    total = status.count_runs(engine, wb.id)
    found = status.list_runs(engine, wb.id, limit=RUNS_PER_PAGE, offset=(page - 1) * RUNS_PER_PAGE)
    pages_total = max(1, -(-total // RUNS_PER_PAGE))
    return render_template("runs.html", **_context(wb), runs=found, page=page, pages_total=pages_total, total=total)


@pages.route("/levels.css")
def level_css():
    """The level colours as a stylesheet, generated from :mod:`web.palette`."""
    body = palette.level_css(max(len(palette.LEVELS), *(len(wb.alerts.levels) for wb in get_config().water_bodies)))
    response = Response(body, mimetype="text/css")
    response.headers["Cache-Control"] = "public, max-age=3600"
    response.set_etag(hashlib.sha256(body.encode("utf-8")).hexdigest()[:16])
    return response.make_conditional(request)


@pages.app_template_global()
def basin_url(wb_id: str, basin_id: str, run: dict | None = None) -> str:
    if run is None:
        return url_for("pages.basin", water_body_id=wb_id, basin_id=basin_id)
    return url_for("pages.basin", water_body_id=wb_id, basin_id=basin_id, run=run["id"])
