"""JSON and CSV API: payloads, the caution, and errors as JSON with the right status."""

from __future__ import annotations

import datetime as dt
import io

import pandas as pd
import pytest

from monitor.alerting.caution import CAUTION
from monitor.alerting.levels import NO_LEVEL
from monitor.alerting.rules import evaluate_run


def test_water_bodies_lists_basins_and_the_framework_with_its_source(client):
    body = client.get("/api/v1/water-bodies").get_json()
    (wb,) = body["water_bodies"]
    assert [b["id"] for b in wb["basins"]] == ["west", "east"]
    assert wb["framework"]["id"] == "who-2003-recreation"
    # WHO (2003) recreational guidance levels, 10 and 50 µg/L chlorophyll-a [verified]
    assert [lv["chlorophyll_ugL"] for lv in wb["framework"]["levels"]] == [10.0, 50.0]
    assert "WHO" in wb["framework"]["source"]


def test_status_carries_the_caution_and_max_probability_per_level(client):
    r = client.get("/api/v1/status")
    body = r.get_json()
    assert body["caution"] == CAUTION and r.headers["X-Bloomline-Caution"] == CAUTION
    basins = {b["id"]: b for b in body["water_bodies"][0]["basins"]}
    assert basins["west"]["p_max_within_horizon"] == {"1": 0.8, "2": 0.02}
    assert basins["west"]["level"] == 0 and basins["west"]["level_name"] == NO_LEVEL == "no alert level forecast"
    # observed: mean of the QC-passed readings of the last local day of the lake (UTC+2): 10 August
    # starts at 9 August 22:00 UTC, 40 h after the seeded series 6.0 + 0.01·i begins, so readings
    # 160..191 fall on it; the failed spike (QC flag 4) in that day is left out
    assert basins["west"]["observed"]["day"] == "2026-08-10"
    assert basins["west"]["observed"]["day_start_utc"] == "2026-08-09T22:00:00Z"
    assert basins["west"]["observed"]["mean_ugL"] == pytest.approx(6.0 + 0.01 * (160 + 191) / 2)


def test_latest_forecast_json_has_every_day_and_statistic(client, analysis_utc):
    body = client.get("/api/v1/water-bodies/quillmere/forecast?basin=west").get_json()
    assert body["caution"] == CAUTION
    assert body["run"]["analysis_utc"] == analysis_utc.strftime("%Y-%m-%dT%H:%M:%SZ")
    days = body["basins"]["west"]["cyanobacteria_chlorophyll"]
    assert [d["lead_days"] for d in days] == [0, 1, 2, 3]
    assert days[3]["q50"] == 13.0 and days[3]["p_level_1"] == 0.8
    assert list(body["basins"]) == ["west"]


def test_latest_forecast_csv_reads_back_with_pandas(client):
    r = client.get("/api/v1/water-bodies/quillmere/forecast?format=csv&quantity=cyanobacteria_chlorophyll")
    assert r.mimetype == "text/csv" and r.headers["X-Bloomline-Caution"] == CAUTION
    text = r.get_data(as_text=True)
    assert text.splitlines()[0] == f"# {CAUTION}"
    df = pd.read_csv(io.StringIO(text), comment="#")
    # 2 basins × 4 days × (6 statistics + 2 levels)
    assert len(df) == 2 * 4 * 8
    west_q50 = df[(df.basin_id == "west") & (df.statistic == "q50")].sort_values("lead_days")
    assert west_q50.value.tolist() == [7.0, 9.0, 11.0, 13.0]


def test_history_gives_day_zero_of_each_run(client):
    body = client.get("/api/v1/water-bodies/quillmere/history?basin=west").get_json()
    assert [a["q50"] for a in body["analyses"]] == [5.0, 7.0]
    csv_text = client.get("/api/v1/water-bodies/quillmere/history?basin=west&format=csv").get_data(as_text=True)
    assert pd.read_csv(io.StringIO(csv_text), comment="#").q50.tolist() == [5.0, 7.0]


def test_runs_lists_newest_first_with_links(client):
    body = client.get("/api/v1/water-bodies/quillmere/runs").get_json()
    assert [r["analysis_utc"][:10] for r in body["runs"]] == ["2026-08-10", "2026-08-09"]
    older = client.get(body["runs"][1]["forecast"]).get_json()
    assert older["basins"]["west"]["cyanobacteria_chlorophyll"][0]["q50"] == 5.0


def test_alert_events_after_an_evaluation_in_json_and_csv(app, client, config, engine):
    run_id = client.get("/api/v1/water-bodies/quillmere/runs?limit=1").get_json()["runs"][0]["id"]
    events = evaluate_run(engine, config, "quillmere", run_id, {"west": 6.2, "east": 0.8},
                          now=dt.datetime(2026, 8, 10, 7, tzinfo=dt.UTC))
    assert [(e["basin_id"], e["to_level"]) for e in events] == [("west", 1)]
    body = client.get("/api/v1/water-bodies/quillmere/alert-events").get_json()
    assert body["caution"] == CAUTION
    (e,) = body["events"]
    assert (e["basin_id"], e["from_level"], e["to_level"], e["probability"], e["observed_ugL"]) == \
        ("west", 0, 1, 0.8, 6.2)
    assert e["to_level_name"] == "Guidance level 1"
    df = pd.read_csv(io.StringIO(client.get(
        "/api/v1/water-bodies/quillmere/alert-events?format=csv").get_data(as_text=True)), comment="#")
    assert df[["basin_id", "to_level"]].values.tolist() == [["west", 1]]
    status = client.get("/api/v1/water-bodies/quillmere/status").get_json()
    assert {b["id"]: b["level"] for b in status["basins"]} == {"west": 1, "east": 0}


@pytest.mark.parametrize("url, code, words", [
    ("/api/v1/water-bodies/atlantis", 404, "no water body 'atlantis'"),
    ("/api/v1/water-bodies/quillmere/forecast?basin=north", 404, "has no basin 'north'"),
    ("/api/v1/water-bodies/quillmere/forecast?format=xml", 400, "format must be json or csv"),
    ("/api/v1/water-bodies/quillmere/forecast?quantity=oxygen", 400, "quantity must be one of"),
    ("/api/v1/water-bodies/quillmere/alert-events?start=yesterday", 400, "ISO 8601"),
    ("/api/v1/water-bodies/quillmere/runs/9999/forecast", 404, "no forecast run 9999"),
    ("/api/v1/no-such-endpoint", 404, "not found"),
])
def test_errors_are_json_with_the_right_status(client, url, code, words):
    r = client.get(url)
    assert r.status_code == code and r.mimetype == "application/json"
    assert r.get_json()["error"]["status"] == code
    assert words.lower() in r.get_json()["error"]["message"].lower()


def test_wrong_method_is_a_json_405(client):
    r = client.post("/api/v1/status")
    assert r.status_code == 405 and r.get_json()["error"]["status"] == 405


def test_no_forecast_yet_is_a_json_404_and_the_page_says_so(config, engine):
    from web import create_app

    client = create_app(config).test_client()  # store without any run
    r = client.get("/api/v1/water-bodies/quillmere/forecast")
    assert r.status_code == 404 and "no forecast has been issued" in r.get_json()["error"]["message"]
    html = client.get("/").get_data(as_text=True)
    assert "No forecast has been issued yet." in html and CAUTION in html
    chart = client.get("/water-bodies/quillmere/basins/west/forecast.svg")
    assert chart.status_code == 200 and b"no forecast or observations yet" in chart.data



def test_the_app_serves_the_push_endpoint(client):
    # the push blueprint answers (its own wording), not the app's generic not-found
    r = client.post("/api/v1/push/nope", json=[], headers={"Authorization": "Bearer x"})
    assert r.status_code == 401 and "missing or wrong token" in r.get_json()["error"]["message"]
