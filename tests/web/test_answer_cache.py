"""Pages and API answers are kept in memory until the store changes, and never with a visitor's form token."""

from __future__ import annotations

import datetime as dt

from monitor.store import status
from tests.web.conftest import ANALYSIS, write_readings, write_run


def _count_overviews(monkeypatch) -> list:
    calls = []
    real = status.water_body_overview

    def counting(*args, **kwargs):
        calls.append(1)
        return real(*args, **kwargs)

    monkeypatch.setattr(status, "water_body_overview", counting)
    return calls


def test_a_page_is_built_once_while_the_store_is_unchanged(client, monkeypatch):
    calls = _count_overviews(monkeypatch)
    first = client.get("/")
    second = client.get("/")
    assert first.data == second.data and len(calls) == 1
    assert second.headers["X-Frame-Options"] == "DENY"  # security headers on a kept answer too


def test_a_new_run_or_reading_shows_at_once(client, engine, monkeypatch):
    before = client.get("/api/v1/water-bodies/quillmere/runs").get_json()
    write_run(engine, "quillmere", ANALYSIS + dt.timedelta(days=1), {"west": ([1.0] * 4, [0.0] * 4, [0.0] * 4)})
    after = client.get("/api/v1/water-bodies/quillmere/runs").get_json()
    assert len(after["runs"]) == len(before["runs"]) + 1
    calls = _count_overviews(monkeypatch)
    client.get("/")
    write_readings(engine, "QE-1", [(ANALYSIS + dt.timedelta(hours=3), 2.0, 1)])
    client.get("/")
    assert len(calls) == 2


def test_the_age_of_a_forecast_follows_the_clock(config, engine, seeded):
    from web import create_app

    clock = [ANALYSIS + dt.timedelta(hours=1)]
    client = create_app(config, clock=lambda: clock[0]).test_client()
    assert "(1 hour ago)" in client.get("/").get_data(as_text=True)
    clock[0] += dt.timedelta(hours=1)
    assert "(2 hours ago)" in client.get("/").get_data(as_text=True)


def test_forms_are_never_kept(client):
    import re

    tokens = set()
    for _ in range(2):
        other = client.application.test_client()  # another visitor, another session
        tokens.update(re.findall(r'name="csrf_token" value="([^"]+)"', other.get("/subscribe").get_data(as_text=True)))
    assert len(tokens) == 2
