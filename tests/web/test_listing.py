"""Many water bodies on the status overview and the API: pages, filters by region and level, counts per level."""

from __future__ import annotations

import datetime as dt

import pytest
from sqlalchemy import insert

from monitor.config import parse_config
from monitor.store.db import open_store
from monitor.store.schema import alert_status

T = dt.datetime(2026, 8, 10, 6, tzinfo=dt.UTC)


@pytest.fixture
def many(tmp_path):
    """Seven invented lakes: odd ones in "North District", even ones in "South District"; lake 2 at level 2
    (one basin), lakes 3 and 5 at level 1."""
    bodies = [{"id": f"lake-{i}", "name": f"Lake {i}", "use": "recreation", "timezone": "UTC",
               "region": "North District" if i % 2 else "South District",
               "basins": [{"id": "a", "name": "A", "volume_m3": 1e6, "mean_depth_m": 3.0, "area_m2": 3e5,
                           "flows_to": "b"},
                          {"id": "b", "name": "B", "volume_m3": 1e6, "mean_depth_m": 3.0, "area_m2": 3e5}],
               "alerts": {"framework": "who-2003-recreation"}} for i in range(1, 8)]
    config = parse_config({"service": {"database": f"sqlite:///{tmp_path / 'many.sqlite'}",
                                       "mailbox_dir": str(tmp_path / "mailbox")},
                           "water_bodies": bodies, "stations": []})
    engine = open_store(config.service.database_url)
    with engine.begin() as conn:
        conn.execute(insert(alert_status), [
            dict(water_body_id=w, basin_id=b, level=lv, since_utc=T, quiet_cycles=0, updated_utc=T)
            for w, b, lv in [("lake-2", "a", 0), ("lake-2", "b", 2), ("lake-3", "a", 1), ("lake-5", "b", 1)]])
    from web import create_app

    yield create_app(config, clock=lambda: T).test_client()
    engine.dispose()


def test_the_water_bodies_api_pages_with_next_and_previous_links(many):
    first = many.get("/api/v1/water-bodies?per_page=3").get_json()
    assert [w["id"] for w in first["water_bodies"]] == ["lake-1", "lake-2", "lake-3"]
    assert first["paging"] | {} == {"page": 1, "per_page": 3, "total": 7, "pages": 3,
                                    "next": "/api/v1/water-bodies?per_page=3&page=2", "previous": None}
    last = many.get(first["paging"]["next"].replace("page=2", "page=3")).get_json()
    assert [w["id"] for w in last["water_bodies"]] == ["lake-7"] and last["paging"]["next"] is None
    assert last["paging"]["previous"] == "/api/v1/water-bodies?per_page=3&page=2"
    assert first["water_bodies"][0]["region"] == "North District"


def test_status_filters_by_level_and_region_and_counts_each_level(many):
    body = many.get("/api/v1/status?level=1").get_json()
    assert [w["id"] for w in body["water_bodies"]] == ["lake-3", "lake-5"]
    # counted before the level filter: 4 at no level, 2 at level 1, 1 at level 2
    assert body["summary"] == {"water_bodies": 7, "region": None, "by_level": {"0": 4, "1": 2, "2": 1}}
    south = many.get("/api/v1/status?region=South%20District").get_json()
    assert [w["id"] for w in south["water_bodies"]] == ["lake-2", "lake-4", "lake-6"]
    assert south["summary"]["by_level"] == {"0": 2, "1": 0, "2": 1}
    assert many.get("/api/v1/status?region=South%20District&level=2").get_json()["paging"]["total"] == 1


@pytest.mark.parametrize("query", ["per_page=0", "per_page=501", "page=0", "level=10", "level=-1", "page=x"])
def test_listing_parameters_out_of_range_answer_400(many, query):
    r = many.get(f"/api/v1/water-bodies?{query}")
    assert r.status_code == 400 and r.get_json()["error"]["message"]


def test_the_overview_page_shows_one_page_counts_and_region_links(many):
    html = many.get("/?per_page=2&page=2").get_data(as_text=True)
    assert "Lake 3" in html and "Lake 4" in html and "Lake 1<" not in html and "Lake 5" not in html
    assert "Page 2 of 4" in html and 'rel="next"' in html and 'rel="prev"' in html
    assert "level 1: 2" in html and "South District" in html
    nowhere = many.get("/api/v1/water-bodies?region=Nowhere").get_json()
    assert nowhere["water_bodies"] == [] and nowhere["summary"]["water_bodies"] == 0
    assert many.get("/api/v1/status?level=5").get_json()["water_bodies"] == []
    assert "No water body matches." in many.get("/?level=5").get_data(as_text=True)
