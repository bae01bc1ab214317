"""API v1: numbers out of range, one way of checking parameters, CSV everywhere a table makes sense, paging."""

from __future__ import annotations

import io

import pandas as pd
import pytest

from monitor.alerting.caution import CAUTION
from tests.web.conftest import ANALYSIS, write_run

HUGE = "9" * 30
WB = "/api/v1/water-bodies/quillmere"


@pytest.mark.parametrize("url", [f"{WB}/runs/{HUGE}/forecast", f"{WB}/runs/2147483648/forecast",
                                 f"{WB}/runs?limit={HUGE}", f"{WB}/runs?offset={HUGE}", f"{WB}/history?limit={HUGE}",
                                 f"{WB}/alert-events?limit={HUGE}"])
def test_numbers_too_large_for_the_database_are_400_not_500(client, url):
    r = client.get(url)
    assert r.status_code == 400 and r.get_json()["error"]["status"] == 400
    assert "between" in r.get_json()["error"]["message"]


@pytest.mark.parametrize("url", [f"/water-bodies/quillmere/basins/west/forecast.png?run={HUGE}",
                                 f"/water-bodies/quillmere/basins/west?run={HUGE}",
                                 "/water-bodies/quillmere/runs?page=0"])
def test_page_and_chart_numbers_out_of_range_are_400(client, url):
    assert client.get(url).status_code == 400


@pytest.mark.parametrize("url", [f"{WB}/runs?limit=abc", f"{WB}/history?limit=abc", f"{WB}/alert-events?limit=abc",
                                 f"{WB}/runs?limit=0", f"{WB}/runs?offset=-1", f"{WB}/runs?limit=1.5",
                                 f"{WB}/runs?limit=", "/api/v1/water-bodies?page=&level=6",
                                 "/api/v1/status?per_page="])
def test_a_malformed_number_is_400_on_every_endpoint(client, url):
    assert client.get(url).status_code == 400


@pytest.mark.parametrize("url", ["/api/v1/", "/api/v1/water-bodies", WB, "/api/v1/status", f"{WB}/status",
                                 f"{WB}/forecast", f"{WB}/runs", f"{WB}/history", f"{WB}/alert-events",
                                 f"{WB}/runs/1/forecast"])
def test_unknown_and_repeated_parameters_are_400_on_every_endpoint(client, url):
    r = client.get(url + "?colour=blue")
    assert r.status_code == 400 and "unknown parameter 'colour'" in r.get_json()["error"]["message"]
    assert client.get(url + "?format=json&format=csv").status_code == 400


@pytest.mark.parametrize("url, rows", [("/api/v1/water-bodies", 2), (WB, 2), ("/api/v1/status", 2),
                                       (f"{WB}/status", 2), (f"{WB}/runs", 2), (f"{WB}/history", 4),
                                       (f"{WB}/alert-events", 0), (f"{WB}/forecast?quantity=total_chlorophyll", 2 * 4 * 6)])
def test_format_csv_is_honoured_on_every_table_endpoint(client, url, rows):
    r = client.get(url + ("&" if "?" in url else "?") + "format=csv")
    assert r.status_code == 200 and r.mimetype == "text/csv" and r.headers["X-Bloomline-Caution"] == CAUTION
    text = r.get_data(as_text=True)
    assert text.splitlines()[0] == f"# {CAUTION}"
    assert len(pd.read_csv(io.StringIO(text), comment="#")) == rows


def test_format_csv_where_no_table_exists_is_a_clear_400(client):
    r = client.get("/api/v1/?format=csv")
    assert r.status_code == 400 and "format must be json for this endpoint" in r.get_json()["error"]["message"]


@pytest.mark.parametrize("url", ["/api/v1/", "/api/v1/water-bodies", WB, "/api/v1/status", f"{WB}/runs"])
def test_every_json_payload_carries_the_caution(client, url):
    r = client.get(url)
    assert r.get_json()["caution"] == CAUTION and r.headers["X-Bloomline-Caution"] == CAUTION


def test_runs_are_paged_and_leave_out_diagnostics_unless_asked(client, engine):
    for k in range(1, 40):
        write_run(engine, "quillmere", ANALYSIS + k * pd.Timedelta(days=1).to_pytimedelta(), {
            "west": ([1.0] * 4, [0.0] * 4, [0.0] * 4), "east": ([1.0] * 4, [0.0] * 4, [0.0] * 4)})
    r = client.get(f"{WB}/runs")
    body = r.get_json()
    assert len(body["runs"]) == 30 and body["paging"]["total"] == 41
    assert all("diagnostics" not in run for run in body["runs"])
    assert body["paging"]["next"] == f"{WB}/runs?offset=30" and 'rel="next"' in r.headers["Link"]
    rest = client.get(body["paging"]["next"]).get_json()
    assert len(rest["runs"]) == 11 and rest["paging"]["next"] is None
    assert {run["id"] for run in body["runs"]}.isdisjoint(run["id"] for run in rest["runs"])
    detailed = client.get(f"{WB}/runs?limit=2&include=diagnostics").get_json()
    assert detailed["runs"][0]["diagnostics"] == {"n_obs": 4, "spread": 0.3}
    assert client.get(f"{WB}/runs?include=everything").status_code == 400


def test_history_is_paged_by_runs_newest_first_and_oldest_first_within_a_page(client, engine):
    for k in range(1, 5):
        write_run(engine, "quillmere", ANALYSIS + k * pd.Timedelta(days=1).to_pytimedelta(), {
            "west": ([10.0 + k] * 4, [0.0] * 4, [0.0] * 4), "east": ([1.0] * 4, [0.0] * 4, [0.0] * 4)})
    page = client.get(f"{WB}/history?basin=west&limit=2").get_json()
    assert [a["q50"] for a in page["analyses"]] == [13.0, 14.0] and page["paging"]["total"] == 6
    older = client.get(page["paging"]["next"]).get_json()
    assert [a["q50"] for a in older["analyses"]] == [11.0, 12.0]


def test_alert_events_page_and_filter_by_basin(client, engine):
    from sqlalchemy import insert

    from monitor.store.schema import alert_events

    with engine.begin() as conn:
        conn.execute(insert(alert_events), [dict(water_body_id="quillmere", basin_id=b, time_utc=ANALYSIS,
                                                 from_level=0, to_level=1, probability=0.6, observed_ugL=None,
                                                 reason="") for b in ("west", "east", "west")])
    body = client.get(f"{WB}/alert-events?basin=west&limit=1").get_json()
    assert len(body["events"]) == 1 and body["paging"]["total"] == 2
    assert client.get(f"{WB}/alert-events?basin=north").status_code == 404
