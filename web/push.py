"""The HTTP push endpoint: utilities send their readings as JSON or CSV batches.

``POST /api/v1/push/<feed>`` with ``Authorization: Bearer <token>`` (or the
header ``X-Bloomline-Token``), the feed's token compared in constant time
(:func:`hmac.compare_digest`). The body is one batch: ``Content-Type:
application/json`` (an object, a list of objects, or ``{"readings": [...]}``)
or ``text/csv``; the columns are the push feed's columns from the config.
The answer is the batch's counts as JSON, with each refused row described
(row, station, column, reason; :mod:`web.push_report`):

* 200 — stored (``status`` ok or partial; rejected rows are kept with reasons);
* 422 — nothing could be stored (every row rejected; ``rejections`` say why);
* 400 empty body, 401 wrong or missing token or no such push feed (the two
  are answered alike, so feed names cannot be discovered without a token),
  413 body larger than :data:`MAX_BODY_BYTES`, 415 other content types,
  500 the batch failed inside the store (retry later).

The view only calls :func:`monitor.ingest.batches.ingest_bytes`.
"""

from __future__ import annotations

import dataclasses
import hmac

from flask import Blueprint, current_app, jsonify, request
from werkzeug.http import HTTP_STATUS_CODES

from monitor.alerting.caution import CAUTION
from monitor.ingest.batches import ingest_bytes
from web.push_report import MAX_REPORTED, rejections
from web.security import MAX_BODY_BYTES

_FORMATS = {"application/json": "json", "text/csv": "csv", "application/csv": "csv"}

push_api = Blueprint("push_api", __name__)


def _error(status: int, message: str, **headers):
    response = jsonify({"error": {"status": status, "name": HTTP_STATUS_CODES.get(status, ""), "message": message}})
    response.status_code = status
    for k, v in headers.items():
        response.headers[k.replace("_", "-")] = v
    return response


def _token() -> str | None:
    auth = request.headers.get("Authorization", "")
    scheme, _, value = auth.partition(" ")
    if scheme.lower() == "bearer" and value.strip():
        return value.strip()
    return request.headers.get("X-Bloomline-Token")


@push_api.post("/api/v1/push/<feed_name>")
def push(feed_name: str):
    ext = current_app.extensions["bloomline"]
    config, engine = ext["config"], ext["engine"]
    feed = next((f for f in config.feeds if f.name == feed_name and f.kind == "push"), None)
    given = _token()
    expected = feed.token if feed is not None and feed.token else None
    # compare even for an unknown feed, so the answer time does not tell which names exist
    ok = hmac.compare_digest((given or "").encode("utf-8"), (expected or "\x00-no-token").encode("utf-8"))
    if feed is None or not given or not ok:
        return _error(401, "missing or wrong token (send 'Authorization: Bearer <token>')",
                      WWW_Authenticate='Bearer realm="bloomline-push"')
    if request.content_length is not None and request.content_length > MAX_BODY_BYTES:
        return _error(413, f"a batch may be at most {MAX_BODY_BYTES} bytes; split it")
    mimetype = (request.mimetype or "").lower()
    if mimetype not in _FORMATS:
        return _error(415, f"expected Content-Type application/json or text/csv, got {mimetype or 'none'!r}")
    body = request.stream.read(MAX_BODY_BYTES + 1)  # bounded even for a chunked body without a length
    if len(body) > MAX_BODY_BYTES:
        return _error(413, f"a batch may be at most {MAX_BODY_BYTES} bytes; split it")
    if not body.strip():
        return _error(400, "empty body: expected a batch of readings")
    feed = dataclasses.replace(feed, format=_FORMATS[mimetype])
    origin = f"push:{feed.name}:{request.remote_addr or 'unknown'}"
    result = ingest_bytes(engine, config, feed, body, origin, now=ext["clock"]())
    payload = {"caution": CAUTION, **result.as_dict()}
    payload["rejections"] = rejections(engine, feed, result.batch_id, body, feed.format)
    payload["rejections_shown"] = f"at most {MAX_REPORTED}; 'rejected' counts them all"
    status = {"ok": 200, "partial": 200, "rejected": 422}.get(result.status, 500)
    response = jsonify(payload)
    response.status_code = status
    return response
