"""The app's protections: security headers, CSRF tokens, rate limits and request size limits.

* Headers on every answer: a Content Security Policy that allows only the
  app's own styles and images and no framing (``frame-ancestors 'none'``,
  and ``X-Frame-Options: DENY`` for older browsers), ``nosniff``, no
  referrer (token links never leak to another site) and a Permissions
  Policy; pages that carry a personal token are not stored by caches.
* CSRF: every HTML form carries a token (Flask-WTF's ``CSRFProtect``),
  checked on every POST outside the API; a POST without it, such as one
  sent from another site, is refused with 400. The API and the push
  endpoint authenticate by token instead and are exempt.
* Rate limits (Flask-Limiter, in memory): per client address and, for
  sign-ups, per email address, answered with 429 and ``Retry-After``.
* Size limits: a URL longer than :data:`MAX_URL_BYTES` answers 414, a body
  larger than :data:`MAX_BODY_BYTES` 413 (as JSON under ``/api/``).

The session cookie (which holds only the CSRF token) is signed with the key
in ``BLOOMLINE_SECRET_KEY``, or with a random key per process when it is
not set (a form left open across a restart then asks to be reloaded).
"""

from __future__ import annotations

import os
import secrets

from flask import Flask, abort, request
from flask_limiter import Limiter
from flask_limiter.util import get_remote_address
from flask_wtf.csrf import CSRFProtect

ENV_SECRET_KEY = "BLOOMLINE_SECRET_KEY"
#: Longest URL (path and query) the app answers [bytes]; longer ones get 414.
MAX_URL_BYTES = 8192
#: Largest request body [bytes]: the push endpoint's batch limit.
MAX_BODY_BYTES = 10 * 1024 * 1024
#: How long a form's CSRF token stays valid [s].
CSRF_TIME_LIMIT_S = 24 * 3600

PAGE_POLICY = ("default-src 'none'; style-src 'self'; img-src 'self' data:; form-action 'self'; "
               "frame-ancestors 'none'; base-uri 'none'")
#: matplotlib's SVG carries its own <style> element.
CHART_POLICY = "default-src 'none'; style-src 'unsafe-inline'; frame-ancestors 'none'"
HEADERS = {
    "X-Content-Type-Options": "nosniff",
    "X-Frame-Options": "DENY",
    "Referrer-Policy": "no-referrer",
    "Permissions-Policy": "camera=(), microphone=(), geolocation=(), interest-cohort=()",
    "Cross-Origin-Opener-Policy": "same-origin",
}

csrf = CSRFProtect()


def client_key() -> str:
    """The rate-limit key of the client: its address as the server saw it."""
    return get_remote_address() or "unknown"


def install(app: Flask, *, base_url: str) -> Limiter:
    """Configure ``app``'s protections; returns its rate limiter."""
    if not app.config.get("SECRET_KEY"):
        app.config["SECRET_KEY"] = os.environ.get(ENV_SECRET_KEY) or secrets.token_hex(32)
    app.config.update(
        MAX_CONTENT_LENGTH=MAX_BODY_BYTES,
        SESSION_COOKIE_HTTPONLY=True,
        SESSION_COOKIE_SAMESITE="Lax",
        SESSION_COOKIE_SECURE=base_url.startswith("https://"),
        SESSION_COOKIE_NAME="bloomline_session",
        WTF_CSRF_TIME_LIMIT=CSRF_TIME_LIMIT_S,
    )
    app.config.setdefault("RATELIMIT_ENABLED", True)
    csrf.init_app(app)
    limiter = Limiter(client_key, app=app, storage_uri="memory://", headers_enabled=True,
                      enabled=app.config["RATELIMIT_ENABLED"])

    @app.before_request
    def _limit_url():
        raw = request.environ.get("RAW_URI") or request.full_path
        if len(raw.encode("utf-8", "surrogateescape")) > MAX_URL_BYTES:
            abort(414, description=f"the URL is longer than {MAX_URL_BYTES} bytes")

    @app.after_request
    def _headers(response):
        for name, value in HEADERS.items():
            response.headers.setdefault(name, value)
        policy = CHART_POLICY if response.mimetype == "image/svg+xml" else PAGE_POLICY
        response.headers.setdefault("Content-Security-Policy", policy)
        return response

    return limiter
