"""Pages and API answers kept in memory until the store changes.

A GET answer of the views wrapped here depends only on the store, the URL
and the time (pages say how old a forecast is), so it is kept per (view,
URL with its query, :func:`monitor.store.status.store_fingerprint`, the
current minute) and served again while none of these changes. Only
successful answers are kept, never a cookie; the security headers are added
to every answer as it leaves (:mod:`web.security`). Pages with forms carry a
per-visitor token and are never wrapped.
"""

from __future__ import annotations

import functools

from flask import Flask, current_app, request

from monitor.store import status
from web import get_engine, now

#: The views whose answers are kept.
CACHED_VIEWS = ("pages.index", "pages.water_body", "pages.basin", "pages.runs",
                "api.water_bodies", "api.water_body", "api.all_status", "api.water_body_status",
                "api.latest_forecast", "api.run_forecast", "api.runs", "api.history", "api.alert_events")
#: Headers never kept with an answer.
_DROPPED = {"set-cookie", "content-length", "date"}


class _NotKept(Exception):
    def __init__(self, response):
        self.response = response


def _weight(item) -> int:
    body, _, headers = item
    return len(body) + sum(len(k) + len(v) for k, v in headers)


def cached(view):
    """Wrap ``view`` so that its successful GET answers are kept (see the module's docstring)."""

    @functools.wraps(view)
    def wrapper(*args, **kwargs):
        if request.method != "GET":
            return view(*args, **kwargs)
        minute = now().replace(second=0, microsecond=0)
        key = (request.endpoint, request.full_path, status.store_fingerprint(get_engine()), minute)

        def render():
            response = current_app.make_response(view(*args, **kwargs))
            if response.status_code != 200 or response.direct_passthrough:
                raise _NotKept(response)
            return (response.get_data(), response.status_code,
                    tuple((k, v) for k, v in response.headers.items() if k.lower() not in _DROPPED))

        try:
            body, code, headers = current_app.extensions["bloomline"]["answers"].get_or_render(key, render)
        except _NotKept as not_kept:
            return not_kept.response
        return current_app.response_class(body, status=code, headers=list(headers))

    return wrapper


def install(app: Flask) -> None:
    """Wrap the views of :data:`CACHED_VIEWS` (call after the blueprints are registered)."""
    from web.chart_cache import ChartCache

    app.extensions["bloomline"]["answers"] = ChartCache(size=_weight)
    for name in CACHED_VIEWS:
        app.view_functions[name] = cached(app.view_functions[name])
