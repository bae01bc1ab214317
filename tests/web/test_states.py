"""What the pages say: distinct states, stale forecasts, time in alert, one wording for chances, local time."""

from __future__ import annotations

import datetime as dt
import re
from html import unescape

from sqlalchemy import insert

from monitor.alerting.caution import CAUTION
from monitor.store.schema import alert_events, alert_status
from tests.web.conftest import ANALYSIS, NOW, write_run

DAY = dt.timedelta(days=1)


def _text(response) -> str:
    """The page's text without tags, whitespace collapsed."""
    return re.sub(r"\s+", " ", unescape(re.sub(r"<[^>]+>", " ", response.get_data(as_text=True))))


def _app(config, clock):
    from web import create_app

    return create_app(config, clock=lambda: clock)


def _row_of(text: str, basin: str) -> str:
    return text[text.index(basin):][:400]


def test_no_forecast_yet_is_not_no_alert_level_forecast(config, engine):
    client = _app(config, NOW).test_client()  # a store without any run
    text = _text(client.get("/"))
    assert "No forecast has been issued yet." in text and "no forecast yet" in _row_of(text, "West Bay")
    assert "no alert level forecast" not in text
    basin = _text(client.get("/water-bodies/quillmere/basins/west"))
    assert "no forecast yet" in basin and "no alert level forecast" not in basin and CAUTION in basin
    body = client.get("/api/v1/water-bodies/quillmere/status").get_json()
    assert {b["state"] for b in body["basins"]} == {"no_forecast"}


def test_no_alert_level_and_a_level_are_named_apart(client, engine):
    text = _text(client.get("/"))
    assert "no alert level forecast" in _row_of(text, "West Bay")
    _set_status(engine, "west", 1, ANALYSIS)
    text = _text(client.get("/"))
    assert "Guidance level 1" in _row_of(text, "West Bay")
    assert client.get("/api/v1/status").get_json()["water_bodies"][0]["basins"][0]["state"] == "level"


def _set_status(engine, basin, level, since):
    with engine.begin() as conn:
        conn.execute(insert(alert_status).values(water_body_id="quillmere", basin_id=basin, level=level,
                                                 since_utc=since, quiet_cycles=0, updated_utc=since))


def _event(engine, basin, t, from_level, to_level, probability=None, reason="run 7: internal note"):
    with engine.begin() as conn:
        conn.execute(insert(alert_events).values(water_body_id="quillmere", basin_id=basin, time_utc=t,
                                                 from_level=from_level, to_level=to_level, probability=probability,
                                                 observed_ugL=None, reason=reason))


def test_in_alert_since_counts_from_entering_alert_not_from_the_last_lowering(client, engine):
    entered = ANALYSIS - 9 * DAY   # 1 August: level 0 → 2
    lowered = ANALYSIS - 2 * DAY   # 8 August: level 2 → 1, still in alert
    _event(engine, "west", entered, 0, 2, 0.7)
    _event(engine, "west", lowered, 2, 1, 0.1)
    _set_status(engine, "west", 1, lowered)  # the rule keeps the time of the last change
    text = _text(client.get("/"))
    assert "Sat 01 Aug 2026" in _row_of(text, "West Bay") and "Sat 08 Aug 2026" not in _row_of(text, "West Bay")
    status = client.get("/api/v1/water-bodies/quillmere/status").get_json()
    west = next(b for b in status["basins"] if b["id"] == "west")
    assert west["since_utc"] == "2026-08-01T06:00:00Z" and west["level_changed_utc"] == "2026-08-08T06:00:00Z"


def test_status_history_is_in_words_without_internal_run_ids(client, engine):
    _event(engine, "west", ANALYSIS - 9 * DAY, 0, 2, 0.7)
    _event(engine, "west", ANALYSIS - 2 * DAY, 2, 1, 0.1)
    _event(engine, "west", ANALYSIS - DAY, 1, 0, 0.0)
    text = _text(client.get("/water-bodies/quillmere/basins/west"))
    assert "entered alert at Guidance level 2: forecast chance of reaching it 70 %" in text
    assert "lowered from Guidance level 2 to Guidance level 1" in text and "still in alert" in text
    assert "left alert (Guidance level 1 cleared)" in text and "not a safety clearance" in text
    assert "run 7" not in text and "internal note" not in text
    assert "Sat 01 Aug 2026, 08:00 UTC+02:00" in text  # local time, zone named


def test_a_forecast_two_days_old_is_marked_stale(config, engine, seeded):
    text = _text(_app(config, ANALYSIS + 2 * DAY).test_client().get("/"))
    assert "Stale." in text and "2 days old" in text
    fresh = _text(_app(config, NOW).test_client().get("/"))
    assert "Stale." not in fresh and "Out of date." not in fresh


def test_a_month_old_forecast_is_not_shown_as_current(config, engine, seeded):
    client = _app(config, ANALYSIS + 31 * DAY).test_client()
    text = _text(client.get("/"))
    assert "Out of date." in text and "31 days old" in text and "horizon has passed" in text
    status = client.get("/api/v1/water-bodies/quillmere/status").get_json()
    assert status["stale"] and status["expired"] and status["forecast_age_hours"] == 31 * 24
    basin = _text(client.get("/water-bodies/quillmere/basins/west"))
    assert "Out of date." in basin


def test_chances_are_written_one_way_at_the_ensembles_resolution(client, engine):
    write_run(engine, "quillmere", ANALYSIS + DAY, {
        "west": ([12.0, 13.0, 14.0, 15.0], [1.0] * 4, [0.0] * 4),
        "east": ([1.0] * 4, [0.0] * 4, [0.0] * 4)})
    pages = " ".join(_text(client.get(u)) for u in ("/", "/water-bodies/quillmere",
                                                   "/water-bodies/quillmere/basins/west"))
    # 60 members (the default): all of them → "> 98 %", none → "< 2 %"
    assert "> 98 %" in pages and "< 2 %" in pages
    assert not re.search(r"(?<![<>] )\b(0|100) %", pages)
    # one wording: no P(…) notation, no bare threshold comparisons
    assert "P(" not in pages and "≥ 0." not in pages
    assert "Chance of reaching Guidance level 1 within 3 days" in pages


def test_pages_show_local_time_with_the_zone(client):
    text = _text(client.get("/water-bodies/quillmere/basins/west"))
    # the analysis at 06:00 UTC is 08:00 at the lake (Etc/GMT-2)
    assert "Mon 10 Aug 2026, 08:00 UTC+02:00" in text
    assert " UTC " not in text.replace("UTC+", "")
