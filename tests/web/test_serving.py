"""A production WSGI server (waitress) behind serve, run and demo; what it tells about itself; URL limits."""

from __future__ import annotations

import datetime as dt
import shutil
import threading
import urllib.error
import urllib.request
from pathlib import Path

import pytest
from click.testing import CliRunner
from flask import Flask

from monitor.app.cli import main
from web.serving import make_server

SAMPLE = Path(__file__).resolve().parents[2] / "sample_feeds"


@pytest.fixture
def served(app):
    server = make_server(app)
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    yield f"http://127.0.0.1:{server.effective_port}"
    server.close()
    thread.join(timeout=5)


def _get(url: str):
    try:
        with urllib.request.urlopen(url, timeout=10) as r:
            return r.status, dict(r.headers), r.read()
    except urllib.error.HTTPError as exc:
        return exc.code, dict(exc.headers), exc.read()


def test_waitress_names_itself_without_a_version(served):
    status, headers, body = _get(served + "/")
    assert status == 200 and headers["Server"] == "Bloomline"
    assert headers["X-Frame-Options"] == "DENY" and b"Read first." in body


def test_a_long_url_is_answered_by_the_app_as_json(served):
    status, headers, body = _get(served + "/api/v1/status?q=" + "a" * 70_000)
    assert status == 414 and headers["Content-Type"] == "application/json"
    assert b'"status":414' in body.replace(b" ", b"")


@pytest.fixture
def no_dev_server(monkeypatch):
    """Flask's development server must not be used: calling it fails the test."""
    def refuse(self, *args, **kwargs):
        raise AssertionError("Flask's development server was started")

    monkeypatch.setattr(Flask, "run", refuse)
    calls = []
    monkeypatch.setattr("web.serving.waitress_serve", lambda app, **kw: calls.append(kw))
    return calls


@pytest.fixture
def config_file(tmp_path):
    shutil.copyfile(SAMPLE / "bloomline.toml", tmp_path / "bloomline.toml")
    return str(tmp_path / "bloomline.toml")


def test_serve_uses_waitress(no_dev_server, config_file):
    result = CliRunner().invoke(main, ["serve", "--config", config_file, "--port", "8123"])
    assert result.exit_code == 0, result.output
    (kw,) = no_dev_server
    assert (kw["host"], kw["port"], kw["ident"]) == ("127.0.0.1", 8123, "Bloomline")


def test_run_serves_the_web_app_with_waitress(no_dev_server, config_file, monkeypatch):
    import monitor.app.scheduler as scheduler
    from monitor.config import load_config

    started = threading.Event()

    class Idle:
        """A service that holds no lease and does nothing, so ``run`` only starts the web app and stops."""

        def __init__(self, *a, **k):
            self.engine = None
            self.owner = "test"

        def close(self):
            pass

    class NoLease:
        seconds = 0.01

        def __init__(self, *a, **k):
            pass

        def acquire(self):
            started.wait(10)
            stop.set()
            return False

        def close(self):
            pass

    stop = threading.Event()
    monkeypatch.setattr(scheduler, "Service", Idle)
    monkeypatch.setattr(scheduler, "SchedulerLease", NoLease)
    monkeypatch.setattr(scheduler, "_on_signals", lambda *a: None)
    monkeypatch.setattr("web.serving.waitress_serve", lambda app, **kw: (no_dev_server.append(kw), started.set()))
    scheduler.run_service(load_config(config_file), with_web=True, stop=stop, json_logs=False)
    assert started.is_set() and no_dev_server[0]["ident"] == "Bloomline"


def test_demo_serves_with_waitress_on_its_port_and_shows_the_season_at_its_end(no_dev_server, monkeypatch,
                                                                               config_file):
    from monitor.config import load_config

    clocks = []
    monkeypatch.setattr("monitor.app.demo.run_demo", lambda workdir, **kw: (
        {"season": {"last_analysis_utc": "2026-11-01T00:00:00+00:00"}}, load_config(config_file)))
    import web

    real = web.create_app
    monkeypatch.setattr(web, "create_app", lambda cfg, clock=None: clocks.append(clock()) or real(cfg, clock=clock))
    result = CliRunner().invoke(main, ["demo", "--port", "8077", "--workdir", str(Path(config_file).parent)])
    assert result.exit_code == 0, result.output
    (kw,) = no_dev_server
    assert kw["port"] == 8077
    assert clocks == [dt.datetime(2026, 11, 1, 1, tzinfo=dt.UTC)]
