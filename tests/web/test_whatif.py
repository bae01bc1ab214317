"""The what-if API and page: JSON in and out with the caution, a bookmarkable form, both fans on one chart."""

from __future__ import annotations

import datetime as dt
import html
import re

import pytest

from monitor.alerting.caution import CAUTION
from tests.monitor.scenarios.wrenfield import ANALYSIS, FIRST, wrenfield_store

NOW = ANALYSIS + dt.timedelta(hours=2)
URL = "/api/v1/water-bodies/wrenfield/what-if"
RELEASE = {"kind": "release", "basin": "upper-arm", "flow_m3s": 3, "from_day": 1, "days": 3}
QUERY = "horizon_days=5&release_basin=upper-arm&release_flow_m3s=3&release_from_day=1&release_days=3"


@pytest.fixture(scope="module")
def wren(tmp_path_factory):
    config, service = wrenfield_store(tmp_path_factory.mktemp("wren-web"))
    service.close()
    return config


def _app(config, clock=lambda: NOW):
    from web import create_app

    return create_app(config, clock=clock)


@pytest.fixture
def client(wren):
    return _app(wren).test_client()


def test_api_answers_with_the_scenario_the_skill_and_the_caution(client):
    r = client.post(URL, json={"actions": [RELEASE, {"kind": "intake", "basin": "upper-arm"}]})
    assert r.status_code == 200, r.json
    body = r.json
    assert body["caution"] == CAUTION and r.headers["X-Bloomline-Caution"] == CAUTION
    assert body["kind"] == "what-if scenario" and "not a forecast" in body["notice"]
    assert body["analysis_utc"] == "2026-08-12T00:00:00Z" and body["horizon_days"] == 5
    arm = body["basins"][0]
    assert arm["id"] == "upper-arm"
    day = arm["quantities"]["cyanobacteria_chlorophyll"][3]
    assert set(day) == {"day", "valid_utc", "without", "with", "difference"}
    assert set(day["difference"]) == {"q05", "q50", "q95", "mean"}
    assert set(arm["levels"][3]) == {"day", "valid_utc", "without", "with", "change"}
    assert body["budget"]["water_m3"] == pytest.approx(3 * 3 * 86400)
    assert body["skill"]["reference"] == "persistence_ensemble"
    assert body["drinking_water"]["intake_basin_with"] == "upper-arm"


@pytest.mark.parametrize(("kwargs", "status", "message"), [
    ({"data": "not json", "content_type": "text/plain"}, 400, "send the what-if as a JSON object"),
    ({"json": {"actions": [{**RELEASE, "basin": "pier"}]}}, 400, "action 1 (release): basin must be one of"),
    ({"json": {"actions": [RELEASE], "horizon_days": 20}}, 400, "horizon_days must be a whole number from 1 to 14"),
    ({"json": {"actions": [RELEASE], "pad": "x" * 70000}}, 413, "at most 65536 bytes"),
])
def test_api_errors_are_json_with_the_status_and_the_caution(client, kwargs, status, message):
    r = client.post(URL, **kwargs)
    assert r.status_code == status
    assert r.json["error"]["status"] == status and message in r.json["error"]["message"]
    assert r.json["caution"] == CAUTION


def test_api_unknown_water_body_and_missing_analysis_are_404(wren):
    r = _app(wren).test_client().post("/api/v1/water-bodies/pondside/what-if", json={"actions": [RELEASE]})
    assert r.status_code == 404 and "no water body 'pondside'" in r.json["error"]["message"]
    early = _app(wren, clock=lambda: FIRST - dt.timedelta(hours=1)).test_client()
    r = early.post(URL, json={"actions": [RELEASE]})
    assert r.status_code == 404 and "no analysis of Wrenfield Water is stored yet" in r.json["error"]["message"]
    assert r.json["caution"] == CAUTION


def test_api_takes_only_post(client):
    r = client.get(URL)
    assert r.status_code == 405 and r.is_json


def test_scenarios_computed_per_minute_are_bounded_and_a_kept_one_is_not_counted(wren):
    app = _app(wren)
    app.config["BLOOMLINE_WHATIF_PER_MINUTE"] = 2
    client = app.test_client()
    for flow in (1, 2):
        assert client.post(URL, json={"actions": [{**RELEASE, "flow_m3s": flow}]}).status_code == 200
    # the same scenario again is kept, not computed again
    assert client.post(URL, json={"actions": [{**RELEASE, "flow_m3s": 1}]}).status_code == 200
    r = client.post(URL, json={"actions": [{**RELEASE, "flow_m3s": 4}]})
    assert r.status_code == 429
    assert 1 <= int(r.headers["Retry-After"]) <= 61
    assert "too many what-if scenarios this minute" in r.json["error"]["message"]


def test_the_page_without_actions_shows_the_form_labelled_as_a_scenario(client):
    r = client.get("/water-bodies/wrenfield/what-if")
    assert r.status_code == 200
    text = r.get_data(as_text=True)
    assert "A scenario, not a forecast and not advice." in text
    assert CAUTION in text
    assert 'name="release_basin"' in text and 'name="load_inflow"' in text and 'name="intake_basin"' in text
    assert "Only Bloomline&#39;s process model" in text
    assert 'id="whatif-result"' not in text


def test_the_page_answers_the_scenario_in_its_address_with_both_outlooks_and_the_chart(client):
    r = client.get(f"/water-bodies/wrenfield/what-if?{QUERY}")
    assert r.status_code == 200
    text = r.get_data(as_text=True)
    assert 'id="whatif-result"' in text and "Scenario from the analysis of 2026-08-12 00:00 UTC" in text
    assert "Water moved by the actions: <strong>777,600 m³</strong>" in text
    assert "P(Alert Level 2) without" in text and "P(Alert Level 2) with" in text
    assert 'id="model-skill"' in text
    # bookmarkable: the form shows the scenario it answers
    assert '<option value="upper-arm" selected>Upper Arm</option>' in text
    assert 'name="release_flow_m3s" value="3"' in text
    chart = html.unescape(re.search(r'<img src="([^"]*/what-if/upper-arm\.svg[^"]*)"', text).group(1))
    svg = client.get(chart)
    assert svg.status_code == 200 and svg.mimetype == "image/svg+xml"
    body = svg.get_data(as_text=True)
    assert "without the action" in body and "with the action" in body and "not a forecast" in body


def test_the_page_reports_bad_input_beside_the_form(client):
    r = client.get("/water-bodies/wrenfield/what-if?release_basin=upper-arm&release_flow_m3s=-1"
                   "&release_from_day=1&release_days=3")
    assert r.status_code == 400
    assert "flow_m3s must be more than 0 m³/s" in r.get_data(as_text=True)


def test_the_water_body_page_links_to_the_what_if(client):
    text = client.get("/water-bodies/wrenfield").get_data(as_text=True)
    assert 'href="/water-bodies/wrenfield/what-if"' in text
