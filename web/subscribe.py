"""Alert email sign-ups: the form, and the pages behind the links in the emails.

Nothing takes effect from the form alone. A new address (or one not yet
confirmed) is recorded inactive and sent a confirmation link; an address
that already receives alerts is sent a link that applies the asked-for
change (:mod:`monitor.alerting.pending`). The form answers the same in
every case, so it never tells whether an address is subscribed. The links
show a page with a button: a GET (a mail system's link scanner) changes
nothing, the POST acts. ``/unsubscribe/<token>`` also takes the one-click
POST of RFC 8058 (body ``List-Unsubscribe=One-Click``), which mail clients
send without a form token.
"""

from __future__ import annotations

from flask import Blueprint, abort, current_app, render_template, request

from monitor.alerting import outbox, pending, subscriptions
from web import get_config, get_engine, now, water_body_or_404
from web.security import csrf

subscribe_pages = Blueprint("subscribe", __name__)

#: Limits per client address and per email address (Flask-Limiter notation), applied in :func:`limit`.
CLIENT_LIMIT = "10 per minute; 60 per day"
ADDRESS_LIMIT = "3 per hour; 10 per day"
TOKEN_LIMIT = "30 per minute"
ONE_CLICK = "One-Click"


def _address_key() -> str:
    """The rate-limit key of a sign-up: the email address as it will be stored."""
    try:
        return "address:" + subscriptions.normalise_email(request.form.get("email", ""))
    except subscriptions.SubscriptionError:
        return "address:invalid"


def limit(app, limiter) -> None:
    """Put the rate limits on this blueprint's views of ``app``."""
    views = app.view_functions
    views["subscribe.form"] = limiter.limit(
        ADDRESS_LIMIT, key_func=_address_key, methods=["POST"],
        error_message="Too many sign-ups for this address; try again later.")(
        limiter.limit(CLIENT_LIMIT, methods=["POST"],
                      error_message="Too many sign-ups from your network; try again later.")(views["subscribe.form"]))
    for name in ("subscribe.confirm", "subscribe.change", "subscribe.unsubscribe"):
        views[name] = limiter.limit(TOKEN_LIMIT, error_message="Too many requests; try again later.")(views[name])


def _no_store(response):
    response.headers["Cache-Control"] = "no-store"
    return response


def _form_values() -> dict:
    return {k: request.form.get(k, "").strip()[:400] for k in ("name", "email", "water_body", "min_level")}


@subscribe_pages.route("/subscribe", methods=["GET", "POST"], endpoint="form")
def form():
    cfg, engine = get_config(), get_engine()
    values = {"name": "", "email": "", "water_body": request.args.get("water_body", ""), "min_level": "1"}
    error = None
    if request.method == "POST":
        values = _form_values()
        try:
            wb = cfg.water_body(values["water_body"])
        except KeyError:
            wb, error = None, "Choose a water body."
        if wb is not None:
            try:
                level = int(values["min_level"] or "1")
                email = subscriptions.normalise_email(values["email"])
                if not 1 <= level <= len(wb.alerts.levels):
                    raise ValueError(level)
            except subscriptions.SubscriptionError as exc:
                error = str(exc)
            except ValueError:
                error = f"Choose an alert level from 1 to {len(wb.alerts.levels)}."
            else:
                name = values["name"] or email.partition("@")[0]
                _ask(engine, cfg, wb, name=name, email=email, level=level)
                page = render_template("subscribe_done.html", wb=wb, email=email)
                return _no_store(current_app.make_response((page, 202)))
    page = render_template("subscribe.html", form=values, error=error)
    return _no_store(current_app.make_response((page, 400 if error else 200)))


def _ask(engine, cfg, wb, *, name: str, email: str, level: int) -> None:
    """Queue the email that lets the address owner make the sign-up or change take effect."""
    existing = pending.find(engine, email, wb.id)
    if existing is not None and existing.active:
        pending.enqueue_change_confirmation(engine, wb, existing, name=name[:200], min_level=level,
                                            base_url=cfg.service.base_url, now=now())
        return
    sub = subscriptions.subscribe(engine, name=name, email=email, water_body_id=wb.id, min_level=level,
                                  known_water_bodies=[w.id for w in cfg.water_bodies],
                                  max_level=len(wb.alerts.levels), now=now())
    outbox.enqueue_confirmation(engine, wb, sub, base_url=cfg.service.base_url, now=now())


def _subscriber(token: str):
    sub = subscriptions.by_token(get_engine(), token)
    if sub is None:
        abort(404, description="This link is not valid (it may be from an old email).")
    return sub, water_body_or_404(sub.water_body_id)


def _page(**context):
    return _no_store(current_app.make_response(render_template("subscription_token.html", **context)))


@subscribe_pages.route("/subscribe/confirm/<token>", methods=["GET", "POST"], endpoint="confirm")
def confirm(token: str):
    sub, wb = _subscriber(token)
    done = False
    if request.method == "POST":
        sub, done = subscriptions.confirm(get_engine(), token), True
    return _page(sub=sub, wb=wb, action="confirm", done=done)


@subscribe_pages.route("/subscribe/change/<token>", methods=["GET", "POST"], endpoint="change")
def change(token: str):
    sub, wb = _subscriber(token)
    source = request.form if request.method == "POST" else request.args
    try:
        level = int(source.get("min_level", ""))
    except ValueError:
        level = 0
    if not 1 <= level <= len(wb.alerts.levels):
        abort(400, description=f"This link asks for an alert level outside 1 to {len(wb.alerts.levels)}.")
    name = (source.get("name", "").strip() or sub.name)[:200]
    if not sub.active:
        abort(409, description="This subscription is not active any more: sign up again to receive alerts.")
    done = False
    if request.method == "POST":
        cfg = get_config()
        sub = subscriptions.subscribe(get_engine(), name=name, email=sub.email, water_body_id=wb.id, min_level=level,
                                      known_water_bodies=[w.id for w in cfg.water_bodies],
                                      max_level=len(wb.alerts.levels), now=now())
        done = True
    return _page(sub=sub, wb=wb, action="change", done=done, new_level=level, new_name=name)


@subscribe_pages.route("/unsubscribe/<token>", methods=["GET", "POST"], endpoint="unsubscribe")
@csrf.exempt
def unsubscribe(token: str):
    sub, wb = _subscriber(token)
    done = False
    if request.method == "POST":
        one_click = request.form.get("List-Unsubscribe") == ONE_CLICK
        if not one_click:
            csrf.protect()  # the page's own button carries a form token; RFC 8058's POST carries the link's token
        sub, done = subscriptions.unsubscribe(get_engine(), token), True
        if one_click:
            return _no_store(current_app.make_response(("Unsubscribed.\n", 200, {"Content-Type": "text/plain"})))
    return _page(sub=sub, wb=wb, action="unsubscribe", done=done)
