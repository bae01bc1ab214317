"""Alert-level names: one wording for every page, email, API answer and the demo."""

from __future__ import annotations

from monitor.alerting.levels import NO_LEVEL, level_info, level_label
from monitor.config import parse_config


def water_body(tmp_path, levels=None):
    alerts = {"framework": "custom", "levels": levels} if levels else {}
    return parse_config({
        "service": {"database": f"sqlite:///{tmp_path / 'levels.sqlite'}"},
        "water_bodies": [{"id": "tarnby", "name": "Tarnby Water", "use": "recreation", "alerts": alerts,
                          "basins": [{"id": "north", "name": "North", "volume_m3": 1e6, "mean_depth_m": 3.0,
                                      "area_m2": 3e5}]}],
    }).water_body("tarnby")


def test_level_zero_is_no_alert_level_forecast_never_a_clearance(tmp_path):
    wb = water_body(tmp_path)
    assert NO_LEVEL == "no alert level forecast"
    assert level_label(wb, 0) == level_label(wb, 0, with_threshold=True) == NO_LEVEL
    assert level_info(wb, 0) == {"number": 0, "name": NO_LEVEL, "chlorophyll_ugL": None, "meaning": ""}


def test_levels_are_named_from_the_config_with_the_threshold_on_request(tmp_path):
    wb = water_body(tmp_path, [{"name": "Watch", "chlorophyll_ugL": 3.0, "meaning": "look closer"},
                               {"name": "Act", "chlorophyll_ugL": 7.5}])
    assert [level_label(wb, n) for n in (1, 2)] == ["Watch", "Act"]
    assert [level_label(wb, n, with_threshold=True) for n in (1, 2)] == ["Watch (3 µg/L)", "Act (7.5 µg/L)"]
    assert level_info(wb, 1) == {"number": 1, "name": "Watch", "chlorophyll_ugL": 3.0, "meaning": "look closer"}


def test_a_level_above_the_ladder_is_named_as_the_top_level(tmp_path):
    # a status stored before the config lost a level still gets a name
    wb = water_body(tmp_path, [{"name": "Watch", "chlorophyll_ugL": 3.0}])
    assert level_label(wb, 3) == "Watch" and level_info(wb, 3)["number"] == 1
