"""HTTP pull against a real local HTTP server: conditional requests, timeouts, back-off."""

from __future__ import annotations

import dataclasses
import datetime as dt
import hashlib
import threading
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer

import pytest
import requests

from monitor.ingest.feeds.http_pull import MAX_BACKOFF, PullState, backoff, fetch, pull_feed
from monitor.store.readings import readings_frame
from tests.monitor.conftest import NOW, fernwater

BODY = (b"time,station,variable,value,unit\n"
        b"2026-07-01T00:00:00Z,FW-1,water_temperature,68.0,degF\n"
        b"2026-07-01T00:15:00Z,FW-1,water_temperature,68.2,degF\n")


class Server:
    """A tiny server: an ETag'd CSV at /data.csv, Last-Modified only at /lm.csv,
    failures at /fail (503 with Retry-After), and a slow answer at /slow."""

    def __init__(self):
        self.body = BODY
        self.requests: list[dict] = []
        self.slow = threading.Event()
        outer = self

        class Handler(BaseHTTPRequestHandler):
            def log_message(self, *args):
                pass

            def do_GET(self):
                outer.requests.append({"path": self.path, **{k.lower(): v for k, v in self.headers.items()}})
                etag = '"' + hashlib.sha256(outer.body).hexdigest()[:16] + '"'
                if self.path == "/data.csv":
                    if self.headers.get("If-None-Match") == etag:
                        self.send_response(304)
                        self.send_header("ETag", etag)
                        self.end_headers()
                        return
                    self._send(200, outer.body, ETag=etag)
                elif self.path == "/lm.csv":
                    stamp = "Wed, 01 Jul 2026 00:30:00 GMT"
                    if self.headers.get("If-Modified-Since") == stamp:
                        self.send_response(304)
                        self.end_headers()
                        return
                    self._send(200, outer.body, **{"Last-Modified": stamp})
                elif self.path == "/plain.csv":
                    self._send(200, outer.body)
                elif self.path == "/fail":
                    self._send(503, b"busy", **{"Retry-After": "120"})
                elif self.path == "/broken":
                    self._send(500, b"oops")
                elif self.path == "/slow":
                    outer.slow.wait(5)
                    self._send(200, outer.body)
                else:
                    self._send(404, b"no")

            def _send(self, code, body, **headers):
                self.send_response(code)
                self.send_header("Content-Type", "text/csv")
                self.send_header("Content-Length", str(len(body)))
                for k, v in headers.items():
                    self.send_header(k, v)
                self.end_headers()
                self.wfile.write(body)

        self.httpd = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
        self.url = f"http://127.0.0.1:{self.httpd.server_address[1]}"
        self.thread = threading.Thread(target=self.httpd.serve_forever, daemon=True)

    def __enter__(self):
        self.thread.start()
        return self

    def __exit__(self, *exc):
        self.slow.set()
        self.httpd.shutdown()
        self.httpd.server_close()


@pytest.fixture
def server():
    with Server() as s:
        yield s


@pytest.fixture
def session():
    with requests.Session() as s:
        yield s


def pull_config(tmp_path, url, **kw):
    feed = {"name": "utility-pull", "kind": "http-pull", "url": url, "layout": "long", "time_column": "time",
            "station_column": "station", "every_minutes": 10.0, "timeout_s": 0.5, **kw}
    return fernwater(tmp_path, feeds=[feed])


def test_etag_makes_the_second_poll_conditional_and_ingests_nothing(tmp_path, sqlite_engine, server, session):
    config = pull_config(tmp_path, server.url + "/data.csv")
    feed, state = config.feed("utility-pull"), PullState()
    r = pull_feed(sqlite_engine, config, feed, state, now=NOW, session=session)
    assert r.status == "ok" and r.accepted == 2
    assert readings_frame(sqlite_engine)["value"].round(6).tolist() == [20.0, 20.111111]  # °F → °C
    assert pull_feed(sqlite_engine, config, feed, state, now=NOW, session=session) is None  # not due yet
    later = NOW + dt.timedelta(minutes=10)
    assert pull_feed(sqlite_engine, config, feed, state, now=later, session=session) is None
    assert server.requests[-1]["if-none-match"] == state.etag
    assert "not modified" in state.history[-1]
    server.body = BODY + b"2026-07-01T00:30:00Z,FW-1,water_temperature,68.4,degF\n"
    r = pull_feed(sqlite_engine, config, feed, state, now=later + dt.timedelta(minutes=10), session=session)
    assert (r.accepted, r.duplicate) == (1, 2)


def test_last_modified_is_sent_back_as_if_modified_since(tmp_path, sqlite_engine, server, session):
    config = pull_config(tmp_path, server.url + "/lm.csv")
    feed, state = config.feed("utility-pull"), PullState()
    assert pull_feed(sqlite_engine, config, feed, state, now=NOW, session=session).accepted == 2
    assert pull_feed(sqlite_engine, config, feed, state, now=NOW, session=session, force=True) is None
    assert server.requests[-1]["if-modified-since"] == "Wed, 01 Jul 2026 00:30:00 GMT"


def test_unchanged_payload_without_validators_is_not_ingested_again(tmp_path, sqlite_engine, server, session):
    config = pull_config(tmp_path, server.url + "/plain.csv")
    feed, state = config.feed("utility-pull"), PullState()
    assert pull_feed(sqlite_engine, config, feed, state, now=NOW, session=session) is not None
    assert pull_feed(sqlite_engine, config, feed, state, now=NOW, session=session, force=True) is None
    assert state.history[-1].endswith("unchanged payload")


def test_failures_back_off_exponentially_and_a_success_resets(tmp_path, sqlite_engine, server, session):
    config = pull_config(tmp_path, server.url + "/broken")
    feed, state = config.feed("utility-pull"), PullState()
    now = NOW
    waits = []
    for _ in range(4):
        assert pull_feed(sqlite_engine, config, feed, state, now=now, session=session) is None
        waits.append((state.next_attempt - now).total_seconds() / 60)
        now = state.next_attempt
    assert waits == [10.0, 20.0, 40.0, 80.0] and state.failures == 4
    assert "HTTP 500" in state.last_error and state.last_status == 500
    assert backoff(feed, 30) == MAX_BACKOFF
    good = dataclasses.replace(feed, url=server.url + "/data.csv")
    assert pull_feed(sqlite_engine, config, good, state, now=now, session=session).status == "ok"
    assert state.failures == 0 and state.last_error is None


def test_retry_after_from_the_server_sets_the_next_attempt(tmp_path, sqlite_engine, server, session):
    config = pull_config(tmp_path, server.url + "/fail")
    state = PullState()
    assert pull_feed(sqlite_engine, config, config.feed("utility-pull"), state, now=NOW, session=session) is None
    assert state.next_attempt - NOW == dt.timedelta(seconds=120)


def test_a_slow_server_times_out_and_counts_as_a_failure(tmp_path, sqlite_engine, server, session):
    config = pull_config(tmp_path, server.url + "/slow")
    state = PullState()
    assert pull_feed(sqlite_engine, config, config.feed("utility-pull"), state, now=NOW, session=session) is None
    assert state.failures == 1 and "Timeout" in state.last_error


def test_fetch_raises_on_http_errors(server):
    with pytest.raises(requests.HTTPError, match="HTTP 404"):
        fetch(server.url + "/missing", timeout_s=1.0)
