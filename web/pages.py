"""HTML pages: the status of every water body, a page per water body, sign-up forms."""

from __future__ import annotations

import datetime as dt

from flask import Blueprint, Response, abort, render_template, request

from monitor.alerting import outbox, subscriptions
from monitor.store import status
from web import get_config, get_engine, now, water_body_or_404
from web.plots import FORMATS, fan_chart

pages = Blueprint("pages", __name__)

#: How many days of history the water-body page plots before the analysis.
HISTORY_DAYS = 30


def _basin(wb, basin_id: str):
    for b in wb.basins:
        if b.id == basin_id:
            return b
    abort(404, description=f"{wb.name} has no basin {basin_id!r}.")


@pages.app_template_filter("utc")
def _fmt_utc(t: dt.datetime | None, fmt: str = "%Y-%m-%d %H:%M") -> str:
    return "—" if t is None else t.astimezone(dt.UTC).strftime(fmt) + " UTC"


@pages.app_template_filter("day")
def _fmt_day(t: dt.datetime | None) -> str:
    return "—" if t is None else t.astimezone(dt.UTC).strftime("%a %d %b")


@pages.app_template_filter("pct")
def _fmt_pct(p: float | None) -> str:
    if p is None:
        return "—"
    if 0 < p < 0.005:
        return "< 1 %"  # not "0 %": a small chance is not no chance
    if 0.995 <= p < 1:
        return "> 99 %"
    return f"{100 * p:.0f} %"


@pages.app_template_filter("ugl")
def _fmt_ugl(x: float | None) -> str:
    if x is None:
        return "—"
    return f"{x:.2f}" if x < 10 else f"{x:.1f}"


@pages.route("/")
def index():
    cfg, engine = get_config(), get_engine()
    overviews = [status.water_body_overview(engine, cfg, wb) for wb in cfg.water_bodies]
    return render_template("status.html", overviews=overviews)


@pages.route("/water-bodies/<water_body_id>")
def water_body(water_body_id: str):
    cfg, engine = get_config(), get_engine()
    wb = water_body_or_404(water_body_id)
    overview = status.water_body_overview(engine, cfg, wb)
    run = overview["latest_run"]
    tables = {}
    if run is not None:
        for b in wb.basins:
            tables[b.id] = status.forecast_series(engine, run, b.id)
    events = status.list_alert_events(engine, wb.id, limit=50)
    return render_template("water_body.html", wb=wb, overview=overview, run=run, tables=tables,
                           events=events, basin_names={b.id: b.name for b in wb.basins})


@pages.route("/water-bodies/<water_body_id>/basins/<basin_id>/forecast.<fmt>")
def forecast_plot(water_body_id: str, basin_id: str, fmt: str):
    if fmt not in FORMATS:
        abort(404, description=f"Charts come as {' or '.join(FORMATS)}.")
    cfg, engine = get_config(), get_engine()
    wb = water_body_or_404(water_body_id)
    basin = _basin(wb, basin_id)
    run_id = request.args.get("run", type=int)
    run = status.get_run(engine, run_id) if run_id else status.latest_run(engine, wb.id)
    if run_id and (run is None or run["water_body_id"] != wb.id):
        abort(404, description=f"{wb.name} has no forecast run {run_id}.")
    forecast, history, observed, t0 = [], [], [], None
    if run is not None:
        t0 = run["analysis_utc"]
        start = t0 - dt.timedelta(days=HISTORY_DAYS)
        end = t0 + dt.timedelta(days=wb.alerts.horizon_days + 1)
        forecast = status.forecast_series(engine, run, basin.id)
        history = status.analysis_history(engine, wb.id, basin.id, start=start, end=t0)
        observed = status.observed_daily(engine, cfg, wb.id, basin.id, start=start, end=end)
    title = f"{basin.name}, {wb.name}" + (f" — forecast from {t0:%d %b %Y}" if t0 else "")
    body = fan_chart(title=title, forecast=forecast, history=history, observed=observed,
                     levels=wb.alerts.levels, fmt=fmt, analysis_utc=t0)
    return Response(body, mimetype=FORMATS[fmt], headers={"Cache-Control": "no-cache"})


@pages.route("/subscribe", methods=["GET", "POST"])
def subscribe():
    cfg, engine = get_config(), get_engine()
    form = {"name": "", "email": "", "water_body": request.args.get("water_body", ""), "min_level": "1"}
    error = None
    if request.method == "POST":
        form = {k: request.form.get(k, "").strip() for k in form}
        try:
            wb = cfg.water_body(form["water_body"])
        except KeyError:
            wb = None
            error = "Choose a water body."
        if wb is not None:
            try:
                level = int(form["min_level"] or "1")
                sub = subscriptions.subscribe(
                    engine, name=form["name"], email=form["email"], water_body_id=wb.id, min_level=level,
                    known_water_bodies=[w.id for w in cfg.water_bodies], max_level=len(wb.alerts.levels),
                    now=now())
            except (ValueError, subscriptions.SubscriptionError) as exc:
                error = str(exc) if isinstance(exc, subscriptions.SubscriptionError) else "Choose an alert level."
            else:
                if not sub.active:
                    outbox.enqueue_confirmation(engine, wb, sub, base_url=cfg.service.base_url, now=now())
                return render_template("subscribe_done.html", wb=wb, sub=sub), 201
    return render_template("subscribe.html", form=form, error=error), (400 if error else 200)


def _token_page(token: str, action: str):
    engine = get_engine()
    sub = subscriptions.by_token(engine, token)
    if sub is None:
        abort(404, description="This link is not valid (it may be from an old email).")
    wb = water_body_or_404(sub.water_body_id)
    done = False
    if request.method == "POST":
        sub = (subscriptions.confirm if action == "confirm" else subscriptions.unsubscribe)(engine, token)
        done = True
    return render_template("subscription_token.html", sub=sub, wb=wb, action=action, done=done)


@pages.route("/subscribe/confirm/<token>", methods=["GET", "POST"])
def confirm(token: str):
    # GET shows a button and POST acts, so link scanners in mail systems change nothing.
    return _token_page(token, "confirm")


@pages.route("/unsubscribe/<token>", methods=["GET", "POST"])
def unsubscribe(token: str):
    return _token_page(token, "unsubscribe")
