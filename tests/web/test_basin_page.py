"""The basin page, the schematic, links between pages and navigation between runs."""

from __future__ import annotations

import datetime as dt
import re
from html import unescape

from sqlalchemy import insert

from monitor.store.schema import alert_status
from tests.web.conftest import ANALYSIS, write_readings, write_run

URL = "/water-bodies/quillmere/basins/west"


def _html(client, url=URL) -> str:
    r = client.get(url)
    assert r.status_code == 200, url
    return unescape(r.get_data(as_text=True))


def _text(html: str) -> str:
    return re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", html))


def test_overview_links_every_basin_to_its_page(client):
    html = _html(client, "/")
    assert 'href="/water-bodies/quillmere/basins/west"' in html and 'href="/water-bodies/quillmere/basins/east"' in html


def test_basin_page_has_every_part(client):
    html = _html(client)
    text = _text(html)
    for heading in ("Status now", "Forecast", "Status history", "Observations by QC flag", "Data health",
                    "Other readings"):
        assert f"<h2>{heading}" in html, heading
    assert re.search(r'<img src="/water-bodies/quillmere/basins/west/forecast\.svg\?[^"]*run=2', html)
    assert re.search(r'<img src="/water-bodies/quillmere/basins/west/readings\.svg\?', html)
    # day by day: the analysis and days 1..3 of the horizon, with the chance of each level
    assert "(analysis)" in text and "(day 3)" in text
    assert "Chance of reaching Guidance level 2" in text


def test_data_health_per_station(client, engine):
    # QW-1 also measures chlorophyll fluorescence; one reading was marked suspect by the drift test (last digit)
    with engine.begin() as conn:
        from monitor.store.schema import readings
        conn.execute(readings.update().where(readings.c.station_id == "QW-1").where(
            readings.c.time_utc == ANALYSIS - dt.timedelta(hours=2)).values(qc_flag=3, qc_tests="111113"))
    text = _text(_html(client))
    row = text[text.index("QW-1 (buoy)"):][:300]
    # the newest reading: the last of the seeded series, 05:45 UTC (the failed spike came at 05:00:01)
    assert "Mon 10 Aug 2026, 07:45 UTC+02:00" in row
    assert "191 pass, 1 suspect, 1 fail" in row  # 192 readings of the series, then the spike
    assert "1 reading suspect of drift" in row


def test_other_readings_show_the_newest_value_of_each_other_variable(config, engine, seeded):
    import dataclasses

    from tests.web.conftest import NOW
    from web import create_app

    stations = tuple(dataclasses.replace(st, variables=(*st.variables, "water_temperature")) if st.id == "QW-1" else st
                     for st in config.stations)
    client = create_app(dataclasses.replace(config, stations=stations), clock=lambda: NOW).test_client()
    write_readings(engine, "QW-1", [(ANALYSIS - dt.timedelta(hours=5), 21.5, 1),
                                    (ANALYSIS - dt.timedelta(hours=3), 22.25, 1),
                                    (ANALYSIS + dt.timedelta(hours=3), 30.0, 1)],  # after now: not yet there
                   variable="water_temperature")
    text = _text(_html(client))
    others = text[text.index("Other readings"):]
    assert "QW-1 Water temperature 22.2 °C Mon 10 Aug 2026, 05:00 UTC+02:00 pass" in others
    assert "Chlorophyll-a fluorescence" not in others  # drawn on the readings chart, not repeated here


def test_earlier_runs_are_reachable_by_links(client, engine):
    html = _html(client)
    (earlier,) = re.findall(r'<a rel="prev" href="([^"]+)"', html)
    assert earlier == "/water-bodies/quillmere/basins/west?run=1"
    old = _html(client, earlier)
    assert "An earlier run." in old and "Sun 09 Aug 2026, 08:00 UTC+02:00" in _text(old)
    assert re.search(r'<a rel="next" href="/water-bodies/quillmere/basins/west\?run=2"', old)
    assert re.search(r'forecast\.svg\?[^"]*run=1', old)
    runs = _html(client, "/water-bodies/quillmere/runs")
    assert "/water-bodies/quillmere/basins/east?run=1" in runs
    assert client.get("/water-bodies/quillmere/basins/west?run=99").status_code == 404


def test_the_schematic_draws_the_flow_and_colours_basins_by_status(client, engine):
    with engine.begin() as conn:
        conn.execute(insert(alert_status).values(water_body_id="quillmere", basin_id="west", level=1,
                                                 since_utc=ANALYSIS, quiet_cycles=0, updated_utc=ANALYSIS))
    html = _html(client, "/water-bodies/quillmere")
    (svg,) = re.findall(r'<svg class="schematic".*?</svg>', html, re.S)
    boxes = dict(re.findall(r'<a href="/water-bodies/quillmere/basins/(\w+)">\s*<rect class="(fill-[\w-]+)"', svg))
    assert boxes == {"west": "fill-1", "east": "fill-0"}
    # West Bay flows into East Bay: West's box is above East's, an arrow joins them, East flows to the outlet
    ys = {b: float(y) for b, y in re.findall(r'basins/(\w+)">\s*<rect class="[^"]+" x="[^"]+" y="([^"]+)"', svg)}
    assert ys["west"] < ys["east"] and "outlet" in svg and svg.count("<line") == 2


def test_a_basin_without_forecast_in_the_run_says_so(client, engine):
    write_run(engine, "quillmere", ANALYSIS + dt.timedelta(days=1), {"west": ([1.0] * 4, [0.0] * 4, [0.0] * 4)})
    text = _text(_html(client, "/water-bodies/quillmere/basins/east"))
    assert "This run has no forecast for East Bay." in text
