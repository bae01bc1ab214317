"""HTTP pull: CSV or JSON from a URL on a schedule.

* Conditional requests (RFC 9110 §13.1): the ``ETag`` and ``Last-Modified``
  of the last answer go back as ``If-None-Match`` / ``If-Modified-Since``;
  ``304 Not Modified`` ingests nothing.
* A payload identical (SHA-256) to the last one is not ingested again,
  for servers that send neither header.
* Every request has the feed's timeout (connect and read).
* Failures (network error, timeout, HTTP 4xx/5xx) back off exponentially:
  the n-th failure in a row waits ``min(every · 2^(n-1), MAX_BACKOFF)``, or
  the server's ``Retry-After`` when it sends one; a success resets it.

Fetching (:func:`fetch`, returns bytes) is split from ingesting
(:func:`pull_feed`); the HTTP session is injected so tests use a real local
server and the scheduler one shared session. The service keeps each feed's
:class:`PullState` in the store (:func:`load_states`, :func:`save_state`),
so validators and back-off survive a restart.
"""

from __future__ import annotations

import datetime as dt
import email.utils
import hashlib
from dataclasses import dataclass, field

import requests

from monitor.ingest.batches import BatchResult, ingest_bytes
from monitor.store import pull_state as stored_states
from monitor.timeutil import UTC, as_utc, now_utc

MAX_BACKOFF = dt.timedelta(hours=6)
USER_AGENT = "bloomline-ingest/0.1"


@dataclass
class FetchResponse:
    status: int
    body: bytes | None  # None for 304
    etag: str | None
    last_modified: str | None
    retry_after_s: float | None = None


@dataclass
class PullState:
    """What one http-pull feed remembers between polls (kept in the store by the service)."""

    etag: str | None = None
    last_modified: str | None = None
    last_sha256: str | None = None
    failures: int = 0
    next_attempt: dt.datetime | None = None
    last_error: str | None = None
    last_status: int | None = None
    history: list[str] = field(default_factory=list)  # short log of recent outcomes, newest last

    def note(self, text: str) -> None:
        self.history.append(text)
        del self.history[:-20]


def load_states(engine) -> dict[str, PullState]:
    """The stored state of every http-pull feed: feed name → :class:`PullState`."""
    return {feed: PullState(etag=v["etag"], last_modified=v["last_modified"], last_sha256=v["last_sha256"],
                            failures=int(v["failures"] or 0), next_attempt=v["next_attempt_utc"],
                            last_error=v["last_error"], last_status=v["last_status"], history=list(v["history"] or []))
            for feed, v in stored_states.load_all(engine).items()}


def save_state(engine, feed_name: str, state: PullState, *, now: dt.datetime) -> None:
    """Store one feed's :class:`PullState` (replacing the stored one)."""
    stored_states.save(engine, feed_name, {
        "etag": state.etag, "last_modified": state.last_modified, "last_sha256": state.last_sha256,
        "failures": state.failures, "next_attempt_utc": state.next_attempt, "last_error": state.last_error,
        "last_status": state.last_status, "history": list(state.history)}, now=now)


def _retry_after(value: str | None) -> float | None:
    if not value:
        return None
    value = value.strip()
    if value.isdigit():
        return float(value)
    try:
        when = email.utils.parsedate_to_datetime(value)
    except (TypeError, ValueError):
        return None
    return max(0.0, (as_utc(when) - dt.datetime.now(UTC)).total_seconds())


def fetch(url: str, *, timeout_s: float, session: requests.Session | None = None,
          etag: str | None = None, last_modified: str | None = None) -> FetchResponse:
    """GET ``url`` (conditional when etag/last_modified are given); raise on network errors and HTTP ≥ 400.

    timeout_s [s] bounds the connection and each read.
    """
    headers = {"User-Agent": USER_AGENT, "Accept": "text/csv, application/json;q=0.9, */*;q=0.5"}
    if etag:
        headers["If-None-Match"] = etag
    if last_modified:
        headers["If-Modified-Since"] = last_modified
    http = session or requests
    resp = http.get(url, headers=headers, timeout=(timeout_s, timeout_s))
    if resp.status_code == 304:
        return FetchResponse(304, None, resp.headers.get("ETag", etag), resp.headers.get("Last-Modified", last_modified))
    if resp.status_code >= 400:
        err = requests.HTTPError(f"HTTP {resp.status_code} from {url}", response=resp)
        err.retry_after_s = _retry_after(resp.headers.get("Retry-After"))  # type: ignore[attr-defined]
        raise err
    return FetchResponse(resp.status_code, resp.content, resp.headers.get("ETag"), resp.headers.get("Last-Modified"))


def backoff(feed, failures: int) -> dt.timedelta:
    """Wait after the ``failures``-th failure in a row: every · 2^(failures-1), at most :data:`MAX_BACKOFF`."""
    minutes = feed.every_minutes * (2 ** max(0, failures - 1))
    return min(dt.timedelta(minutes=minutes), MAX_BACKOFF)


def pull_feed(engine, config, feed, state: PullState, *, now: dt.datetime | None = None,
              session: requests.Session | None = None, force: bool = False) -> BatchResult | None:
    """Poll one http-pull feed if it is due; return the batch, or None when nothing was ingested.

    ``state`` is updated in place (validators, back-off, last error).
    """
    now = now or now_utc()
    if not force and state.next_attempt is not None and now < state.next_attempt:
        return None
    try:
        resp = fetch(feed.url, timeout_s=feed.timeout_s, session=session, etag=state.etag,
                     last_modified=state.last_modified)
    except (requests.RequestException, OSError) as exc:
        state.failures += 1
        state.last_error = f"{type(exc).__name__}: {exc}"
        retry = getattr(exc, "retry_after_s", None)
        wait = dt.timedelta(seconds=retry) if retry is not None else backoff(feed, state.failures)
        state.next_attempt = now + min(wait, MAX_BACKOFF)
        response = getattr(exc, "response", None)
        state.last_status = getattr(response, "status_code", None)
        state.note(f"{now:%Y-%m-%dT%H:%MZ} failed ({state.last_error}); next {state.next_attempt:%H:%MZ}")
        return None
    state.failures = 0
    state.last_error = None
    state.last_status = resp.status
    state.next_attempt = now + dt.timedelta(minutes=feed.every_minutes)
    state.etag = resp.etag or state.etag
    state.last_modified = resp.last_modified or state.last_modified
    if resp.body is None:
        state.note(f"{now:%Y-%m-%dT%H:%MZ} not modified")
        return None
    sha = hashlib.sha256(resp.body).hexdigest()
    if sha == state.last_sha256:
        state.note(f"{now:%Y-%m-%dT%H:%MZ} unchanged payload")
        return None
    result = ingest_bytes(engine, config, feed, resp.body, feed.url, now=now)
    if result.status != "failed":
        state.last_sha256 = sha
    state.note(f"{now:%Y-%m-%dT%H:%MZ} batch {result.batch_id}: {result.status}")
    return result
