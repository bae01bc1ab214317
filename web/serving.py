"""Serving the app with waitress, a production WSGI server (Flask's own server is for development only).

The server names itself ``Bloomline`` without a version, bounds request
headers (and so the URL) and bodies, and runs a pool of worker threads.
The app answers URLs longer than :data:`web.security.MAX_URL_BYTES` itself
(414, as JSON under ``/api/``); waitress refuses only what is larger than
its own header limit.
"""

from __future__ import annotations

from waitress import serve as waitress_serve
from waitress.server import create_server

from web.security import MAX_BODY_BYTES

#: Settings of every Bloomline server (waitress adjustments).
SETTINGS = {
    "ident": "Bloomline",
    "threads": 8,
    "max_request_header_size": 256 * 1024,  # [bytes] above the app's URL limit, so the app answers first
    "max_request_body_size": MAX_BODY_BYTES + 64 * 1024,  # [bytes] the push limit and room for the headers
    "channel_timeout": 60,  # [s] an idle connection is closed
    "connection_limit": 200,
    "clear_untrusted_proxy_headers": True,
}


def serve(app, host: str, port: int, **overrides) -> None:
    """Serve ``app`` on host:port until interrupted."""
    waitress_serve(app, host=host, port=port, **{**SETTINGS, **overrides})


def make_server(app, host: str = "127.0.0.1", port: int = 0, **overrides):
    """A waitress server bound to host:port (0: a free port), not yet running.

    Its ``effective_port`` is the port bound; ``run()`` serves until
    ``close()`` is called (tests run it in a thread).
    """
    return create_server(app, host=host, port=port, **{**SETTINGS, **overrides})
