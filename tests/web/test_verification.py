"""The verification page and API over a live record built by the service's own cycles."""

from __future__ import annotations

import dataclasses
import datetime as dt
import sqlite3
from contextlib import closing
from pathlib import Path

import pytest

from monitor.alerting.caution import CAUTION
from monitor.app.service import Service
from monitor.store.db import open_store
from monitor.verification.replay import DiscardTransport, analysis_days
from web import create_app

UTC = dt.UTC
FIRST = dt.datetime(2026, 7, 1, 6, 0, tzinfo=UTC)


@pytest.fixture(scope="module")
def record_app(brackenfold, tmp_path_factory):
    config, _, folder = brackenfold
    tmp = tmp_path_factory.mktemp("record")
    with closing(sqlite3.connect(Path(folder) / "brackenfold.sqlite")) as src, \
            closing(sqlite3.connect(tmp / "live.sqlite")) as dst:
        src.backup(dst)
    url = f"sqlite:///{tmp / 'live.sqlite'}"
    engine = open_store(url)
    days = analysis_days(FIRST, FIRST + dt.timedelta(days=12))
    service = Service(config, engine=engine, transport=DiscardTransport(), clock=lambda: days[0], replay=True)
    for day in days:
        service.clock = lambda day=day: day
        service.run_cycles(day, season_start=days[0] - dt.timedelta(days=1))
    engine.dispose()
    cfg = dataclasses.replace(config, service=dataclasses.replace(config.service, database_url=url))
    return create_app(cfg, clock=lambda: days[-1]).test_client()


def test_verification_api_gives_skill_by_lead_against_each_baseline_with_the_caution(record_app):
    got = record_app.get("/api/v1/water-bodies/brackenfold/verification").get_json()
    assert got["caution"] == CAUTION
    assert got["pairs"] > 0
    refs = {row["reference"] for row in got["skill_by_lead"]}
    assert {"persistence", "persistence_ensemble", "statistical"} <= refs
    leads = {row["lead_days"] for row in got["by_lead"] if row["forecaster"] == "bloomline"}
    assert leads == set(range(1, 8))
    assert len(got["rank_histogram"]) == 61 and sum(got["rank_histogram"]) > 0  # 60 members: 61 ranks
    assert got["reliability"] and got["reliability"][0]["bins"]
    # the newest run's blend: weights per component that sum to one at every lead, bias and spread
    blend = got["blend"]
    assert blend["published"] is True
    leads = blend["by_quantity"]["total_chlorophyll"]
    assert [e["lead_days"] for e in leads] == list(range(1, 8))
    for e in leads:
        assert set(e["weights"]) <= {"process_model", "persistence_ensemble", "statistical"}
        assert sum(e["weights"].values()) == pytest.approx(1.0, abs=1e-3)
        assert 0.5 <= e["spread_factor"] <= 4.0


def test_verification_page_shows_the_record_and_its_charts(record_app):
    page = record_app.get("/water-bodies/brackenfold/verification")
    assert page.status_code == 200
    html = page.get_data(as_text=True)
    assert CAUTION in html and "Skill by lead day" in html and "persistence ensemble" in html
    assert "How the published forecast is made" in html and "weight: process model" in html
    for chart in ("crps-total_chlorophyll", "reliability-1?level=1", "history-main"):
        image = record_app.get(f"/water-bodies/brackenfold/verification/{chart.split('?')[0]}.png"
                               + ("?" + chart.split("?")[1] if "?" in chart else ""))
        assert image.status_code == 200 and image.data[:4] == b"\x89PNG", chart


@pytest.mark.parametrize("url, status", [
    ("/api/v1/water-bodies/nowhere/verification", 404),
    ("/api/v1/water-bodies/brackenfold/verification?since=yesterday", 400),
    ("/api/v1/water-bodies/brackenfold/verification?format=xml", 400),
    ("/water-bodies/brackenfold/verification/history-nowhere.png", 404),
])
def test_verification_answers_bad_requests_with_their_status(record_app, url, status):
    assert record_app.get(url).status_code == status


def test_verification_csv_starts_with_the_caution(record_app):
    text = record_app.get("/api/v1/water-bodies/brackenfold/verification?format=csv").get_data(as_text=True)
    assert text.startswith(f"# {CAUTION}") and "crps" in text.splitlines()[1]
