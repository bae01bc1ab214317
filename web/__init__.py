"""Bloomline's web app: status pages, the JSON/CSV API, the push endpoint and subscriptions.

``create_app(config=None)`` builds the Flask app. ``config`` is a
:class:`monitor.config.Config`, a path to the TOML file, or None to read the
path from the environment variable ``BLOOMLINE_CONFIG``. The store is
opened (and migrated) with :func:`monitor.store.db.open_store`. Views read and
write only through ``monitor`` store functions. Serve it with
:func:`web.serving.serve` (waitress), never Flask's development server.
"""

from __future__ import annotations

import datetime as dt
import os
from collections.abc import Callable

from flask import Flask, abort, current_app, jsonify, render_template, request
from flask_wtf.csrf import CSRFError
from werkzeug.exceptions import HTTPException

from monitor.alerting.caution import CAUTION
from monitor.alerting.levels import level_label
from monitor.config import Config, load_config
from monitor.store.db import open_store

ENV_CONFIG = "BLOOMLINE_CONFIG"


def _utcnow() -> dt.datetime:
    return dt.datetime.now(dt.UTC)


def _resolve_config(config) -> Config:
    if isinstance(config, Config):
        return config
    if config is None:
        path = os.environ.get(ENV_CONFIG)
        if not path:
            raise RuntimeError(f"no configuration: pass create_app(config) or set {ENV_CONFIG} to the TOML file")
        return load_config(path)
    return load_config(config)


def create_app(config: Config | str | os.PathLike | None = None, *,
               clock: Callable[[], dt.datetime] | None = None, settings: dict | None = None) -> Flask:
    """The Flask app over the store named by ``config.service.database_url``.

    ``clock`` returns the current aware UTC time (injected by tests; the
    wall clock by default). ``settings`` are Flask config values set before
    the app is built (e.g. ``{"RATELIMIT_ENABLED": False}``).
    """
    from web import answer_cache, formatting, security
    from web.api import api
    from web.chart_cache import ChartCache
    from web.charts import charts
    from web.health import health_api
    from web.openapi import openapi_document
    from web.pages import pages
    from web.push import push_api
    from web.subscribe import limit, subscribe_pages
    from web.verification import verification
    from web.whatif import whatif

    cfg = _resolve_config(config)
    app = Flask(__name__)
    app.config.update(settings or {})
    app.json.sort_keys = False
    app.extensions["bloomline"] = {
        "config": cfg,
        "engine": open_store(cfg.service.database_url),
        "clock": clock or _utcnow,
        "charts": ChartCache(),
        "openapi_paths": {},
    }
    limiter = security.install(app, base_url=cfg.service.base_url)
    app.extensions["bloomline"]["limiter"] = limiter

    app.register_blueprint(pages)
    app.register_blueprint(charts)
    app.register_blueprint(subscribe_pages)
    app.register_blueprint(api, url_prefix="/api/v1")
    app.register_blueprint(push_api)
    app.register_blueprint(verification)
    app.register_blueprint(whatif)
    app.register_blueprint(health_api)
    security.csrf.exempt(api)
    security.csrf.exempt(push_api)
    security.csrf.exempt(whatif)  # JSON API and a GET form
    limit(app, limiter)
    answer_cache.install(app)
    app.extensions["bloomline"]["openapi"] = lambda: openapi_document(app)
    from web.health import OPENAPI_PATH as health_paths
    from web.verification import OPENAPI_PATH as verification_paths
    from web.whatif import OPENAPI_PATH as whatif_paths

    app.extensions["bloomline"]["openapi_paths"].update({**verification_paths, **whatif_paths, **health_paths})

    members = cfg.filter.members

    @app.context_processor
    def _globals():
        return {"caution": CAUTION, "bloomline_config": cfg, "members": members}

    app.add_template_filter(formatting.local_time, "local")
    app.add_template_filter(formatting.local_date, "localdate")
    app.add_template_filter(formatting.concentration, "ugl")
    app.add_template_filter(formatting.duration, "duration")
    app.add_template_filter(formatting.reading, "reading")
    app.add_template_filter(formatting.forecast_day, "forecast_day")
    app.add_template_filter(lambda p: formatting.chance(p, members), "chance")
    app.add_template_filter(lambda t, tz: formatting.zone_label(t, tz), "zone")
    app.add_template_global(level_label, "level_name")

    @app.errorhandler(CSRFError)
    def _csrf_error(exc: CSRFError):
        exc.description = ("This form has expired or was sent from another site. Reload the page and send it again.")
        return _http_error(exc)

    @app.errorhandler(HTTPException)
    def _http_error(exc: HTTPException):
        code = exc.code or 500
        headers = [(k, v) for k, v in exc.get_headers() if k.lower() != "content-type"]
        if request.path.startswith("/api/"):
            response = jsonify({"error": {"status": code, "name": exc.name, "message": exc.description}})
            response.status_code = code
        else:
            response = app.make_response((render_template("error.html", error=exc), code))
        for k, v in headers:
            response.headers[k] = v
        if code >= 400:
            response.headers["Cache-Control"] = "no-store"
        return response

    return app


def get_config() -> Config:
    return current_app.extensions["bloomline"]["config"]


def get_engine():
    return current_app.extensions["bloomline"]["engine"]


def now() -> dt.datetime:
    return current_app.extensions["bloomline"]["clock"]()


def water_body_or_404(water_body_id: str):
    """The configured water body with this id, or a 404 for the request.

    The app's error handler answers the 404 in the blueprint's own form: a
    JSON error under ``/api/``, the HTML error page elsewhere.
    """
    try:
        return get_config().water_body(water_body_id)
    except KeyError:
        abort(404, description=f"There is no water body {water_body_id!r}.")


def basin_or_404(wb, basin_id: str):
    """The basin of ``wb`` with this id, or a 404 for the request."""
    for b in wb.basins:
        if b.id == basin_id:
            return b
    abort(404, description=f"{wb.name} has no basin {basin_id!r}.")
