"""Bloomline's web app: status pages, the JSON/CSV API, the push endpoint and subscriptions.

``create_app(config=None)`` builds the Flask app. ``config`` is a
:class:`monitor.config.Config`, a path to the TOML file, or None to read the
path from the environment variable ``BLOOMLINE_CONFIG``. The store is
opened (and migrated) with :func:`monitor.store.db.open_store`. Views read and
write only through ``monitor`` store functions.
"""

from __future__ import annotations

import datetime as dt
import os
from collections.abc import Callable

from flask import Flask, abort, current_app, jsonify, render_template, request
from werkzeug.exceptions import HTTPException

from monitor.alerting.caution import CAUTION
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
               clock: Callable[[], dt.datetime] | None = None) -> Flask:
    """The Flask app over the store named by ``config.service.database_url``.

    ``clock`` returns the current aware UTC time (injected by tests; the
    wall clock by default).
    """
    cfg = _resolve_config(config)
    app = Flask(__name__)
    app.json.sort_keys = False
    app.extensions["bloomline"] = {
        "config": cfg,
        "engine": open_store(cfg.service.database_url),
        "clock": clock or _utcnow,
    }

    from web.api import api
    from web.pages import pages
    from web.push import push_api

    app.register_blueprint(pages)
    app.register_blueprint(api, url_prefix="/api/v1")
    app.register_blueprint(push_api)
    app.register_blueprint(__import__("web.health", fromlist=["health_api"]).health_api)

    @app.context_processor
    def _globals():
        return {"caution": CAUTION, "bloomline_config": cfg}

    @app.errorhandler(HTTPException)
    def _http_error(exc: HTTPException):
        if request.path.startswith("/api/"):
            response = jsonify({"error": {"status": exc.code, "name": exc.name, "message": exc.description}})
            response.status_code = exc.code or 500
            return response
        return render_template("error.html", error=exc), exc.code or 500

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
