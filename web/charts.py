"""The chart endpoints of a basin, cached by what they draw.

``/water-bodies/<id>/basins/<basin>/forecast.<png|svg>`` (the fan chart) and
``…/readings.<png|svg>`` (readings by QC flag) take ``run`` (default the
newest), ``size`` (``wide`` or ``narrow``) and ``v``, the fingerprint of the
chart's data (:func:`monitor.store.status.chart_version`). Pages link charts
with ``v``; an answer whose ``v`` matches may be cached for good
(``immutable``), any other is revalidated through its ``ETag``. Each chart is
rendered once per fingerprint and kept in memory (:mod:`web.chart_cache`).
"""

from __future__ import annotations

import datetime as dt

from flask import Blueprint, Response, abort, current_app, request, url_for

from monitor.ingest.variables import VARIABLES
from monitor.store import station_health, status
from web import basin_or_404, get_config, get_engine, now, params, water_body_or_404
from web.formatting import zone
from web.plots import FORMATS, SIZES, fan_chart, readings_chart

charts = Blueprint("charts", __name__)

#: Days of history drawn before the analysis.
HISTORY_DAYS = 30
KINDS = ("forecast", "readings")
IMMUTABLE = "public, max-age=31536000, immutable"


def _window(wb, run: dict | None) -> tuple[dt.datetime, dt.datetime]:
    """The x-range of a basin's charts: 30 days before the analysis to the end of the horizon."""
    if run is not None:
        t0 = run["analysis_utc"]
    else:  # no run yet: around today (to the hour, so the fingerprint holds for an hour)
        t0 = now().replace(minute=0, second=0, microsecond=0)
    return t0 - dt.timedelta(days=HISTORY_DAYS), t0 + dt.timedelta(days=wb.alerts.horizon_days + 1)


def _variables(kind: str) -> tuple[str, ...]:
    return (status.OBSERVED_VARIABLE,) if kind == "forecast" else station_health.BLOOM_VARIABLES


def _version(wb, basin_id: str, run: dict | None, kind: str) -> str:
    start, end = _window(wb, run)
    return status.chart_version(get_engine(), get_config(), wb, basin_id, run, start, end, _variables(kind))


def chart_urls(kind: str, wb, basin_id: str, run: dict | None, fmt: str = "svg") -> dict[str, str]:
    """``{"wide": url, "narrow": url}`` of a basin chart, each carrying its data's fingerprint."""
    version = _version(wb, basin_id, run, kind)
    extra = {"run": run["id"]} if run is not None else {}
    return {size: url_for(f"charts.{kind}", water_body_id=wb.id, basin_id=basin_id, fmt=fmt, size=size, v=version,
                          **extra) for size in SIZES}


def _render(kind: str, wb, basin, run: dict | None, fmt: str, size: str) -> bytes:
    cfg, engine = get_config(), get_engine()
    tz = zone(wb.timezone)
    start, end = _window(wb, run)
    if kind == "readings":
        rows = station_health.readings_by_flag(engine, cfg, wb.id, basin.id, start=start, end=end)
        variables = {v: f"{v.replace('_', ' ')} [µg/L]" for v in station_health.BLOOM_VARIABLES
                     if cfg.stations_of(wb.id, basin=basin.id, variable=v) and VARIABLES[v].unit == "ug/L"}
        return readings_chart(title=f"Readings, {basin.name}", rows=rows, variables=variables or
                              {status.OBSERVED_VARIABLE: "phycocyanin [µg/L]"}, tz=tz, window=(start, end),
                              fmt=fmt, size=size)
    forecast, history, observed, t0 = [], [], [], None
    if run is not None:
        t0 = run["analysis_utc"]
        forecast = status.forecast_series(engine, run, basin.id)
        history = status.analysis_history(engine, wb.id, basin.id, start=start, end=t0)
        observed = status.observed_daily(engine, cfg, wb.id, basin.id, start=start, end=end, tz=tz)
    else:
        observed = status.observed_daily(engine, cfg, wb.id, basin.id, start=start, end=end, tz=tz)
    title = f"{basin.name}" + (f", forecast from {t0.astimezone(tz):%d %b %Y %H:%M}" if t0 else "")
    return fan_chart(title=title, forecast=forecast, history=history, observed=observed, levels=wb.alerts.levels,
                     tz=tz, window=(start, end), fmt=fmt, size=size, analysis_utc=t0)


def _chart(kind: str, water_body_id: str, basin_id: str, fmt: str):
    if fmt not in FORMATS:
        abort(404, description=f"Charts come as {' or '.join(FORMATS)}.")
    params.accept("run", "size", "v")
    wb = water_body_or_404(water_body_id)
    basin = basin_or_404(wb, basin_id)
    size = params.choice("size", tuple(SIZES), "wide")
    run_id = params.integer("run", None, minimum=1, maximum=status.MAX_ID)
    asked = request.args.get("v")
    cache = current_app.extensions["bloomline"]["charts"]
    if run_id is not None and asked:  # a page's own link: served from memory without asking the store
        held = cache.get((kind, wb.id, basin.id, run_id, fmt, size, asked))
        if held is not None:
            return _answer(held, kind, run_id, fmt, size, asked, asked)
    engine = get_engine()
    run = status.get_run(engine, run_id) if run_id is not None else status.latest_run(engine, wb.id)
    if run_id is not None and (run is None or run["water_body_id"] != wb.id):
        abort(404, description=f"{wb.name} has no forecast run {run_id}.")
    version = _version(wb, basin.id, run, kind)
    key = (kind, wb.id, basin.id, run["id"] if run else None, fmt, size, version)
    if request.if_none_match.contains(_etag(kind, key[3], fmt, size, version)):
        body = b""
    else:
        body = cache.get_or_render(key, lambda: _render(kind, wb, basin, run, fmt, size))
    return _answer(body, kind, key[3], fmt, size, version, asked)


def _etag(kind: str, run_id: int | None, fmt: str, size: str, version: str) -> str:
    return f"{kind}-{run_id or 0}-{fmt}-{size}-{version}"


def _answer(body: bytes, kind: str, run_id: int | None, fmt: str, size: str, version: str, asked: str | None):
    """The chart (or 304 when the client holds it), immutable when asked by its current fingerprint."""
    etag = _etag(kind, run_id, fmt, size, version)
    headers = {"Cache-Control": IMMUTABLE if asked == version else "no-cache"}
    if request.if_none_match.contains(etag):
        response = Response(status=304, headers=headers)
    else:
        response = Response(body, mimetype=FORMATS[fmt], headers=headers)
    response.set_etag(etag)
    return response


@charts.route("/water-bodies/<water_body_id>/basins/<basin_id>/forecast.<fmt>")
def forecast(water_body_id: str, basin_id: str, fmt: str):
    return _chart("forecast", water_body_id, basin_id, fmt)


@charts.route("/water-bodies/<water_body_id>/basins/<basin_id>/readings.<fmt>")
def readings(water_body_id: str, basin_id: str, fmt: str):
    return _chart("readings", water_body_id, basin_id, fmt)
