"""Configuration: the demo config validates, and each mistake is named with file and key."""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

from monitor.config import ConfigError, load_config, parse_config

SAMPLE = Path(__file__).resolve().parents[3] / "sample_feeds" / "bloomline.toml"


def sample_data() -> dict:
    return tomllib.loads(SAMPLE.read_text())


def test_sample_config_validates_with_both_water_bodies_and_frameworks():
    cfg = load_config(SAMPLE)
    assert [wb.id for wb in cfg.water_bodies] == ["corrisdale", "sorrel-lake"]
    res, lake = cfg.water_bodies
    assert res.use == "drinking-water" and res.alerts.framework == "who-1999-drinking-water"
    # WHO (1999) drinking-water Alert Level 1 at 1 µg/L chlorophyll-a (Chorus & Bartram 1999) [verified]
    assert res.alerts.levels[0].chlorophyll_ugL == 1.0
    # WHO (2003) recreational guidance: 10 µg/L chlorophyll-a with cyanobacterial dominance [verified]
    assert lake.alerts.levels[0].chlorophyll_ugL == 10.0
    assert [b.flows_to for b in res.basins] == ["middle-reach", "dam-basin", "outlet"]


def test_relative_sqlite_path_is_resolved_against_the_config_folder():
    cfg = load_config(SAMPLE)
    assert cfg.service.database_url == f"sqlite:///{SAMPLE.parent.resolve() / 'bloomline.sqlite'}"


def test_missing_file_is_reported_with_its_path(tmp_path):
    with pytest.raises(ConfigError, match=r"nope\.toml: <file>: cannot read the file"):
        load_config(tmp_path / "nope.toml")


def test_toml_syntax_error_names_the_file(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text("[service\n")
    with pytest.raises(ConfigError, match=r"bad\.toml: <syntax>: not valid TOML"):
        load_config(bad)


def test_negative_volume_names_the_key():
    data = sample_data()
    data["water_bodies"][0]["basins"][1]["volume_m3"] = -5.0
    with pytest.raises(ConfigError, match=r"water_bodies\[0\]\.basins\[1\]\.volume_m3: expected a positive number"):
        parse_config(data, SAMPLE)


def test_unknown_key_is_rejected_rather_than_ignored():
    data = sample_data()
    data["water_bodies"][1]["alerts"]["warn_probabilty"] = 0.3
    with pytest.raises(ConfigError, match=r"water_bodies\[1\]\.alerts\.warn_probabilty: unknown key"):
        parse_config(data, SAMPLE)


def test_flow_to_an_unknown_basin_is_rejected():
    data = sample_data()
    data["water_bodies"][0]["basins"][0]["flows_to"] = "nowhere"
    with pytest.raises(ConfigError, match=r"basins\[0\]\.flows_to: expected 'outlet' or one of"):
        parse_config(data, SAMPLE)


def test_a_loop_in_the_flow_network_is_rejected():
    data = sample_data()
    data["water_bodies"][0]["basins"][2]["flows_to"] = "fennick-arm"
    with pytest.raises(ConfigError, match=r"water_bodies\[0\]\.basins: the flow network has a loop"):
        parse_config(data, SAMPLE)


def test_wrong_type_says_what_was_expected():
    data = sample_data()
    data["water_bodies"][0]["alerts"]["horizon_days"] = "seven"
    with pytest.raises(ConfigError, match=r"alerts\.horizon_days: expected an integer, got 'seven'"):
        parse_config(data, SAMPLE)


def test_unknown_variable_at_a_station_is_rejected():
    data = sample_data()
    data["stations"][0]["variables"].append("chlorophyl")
    with pytest.raises(ConfigError, match=r"stations\[0\]\.variables: unknown variable 'chlorophyl'"):
        parse_config(data, SAMPLE)


def test_custom_levels_must_increase():
    data = sample_data()
    data["water_bodies"][1]["alerts"] = {"framework": "custom", "levels": [
        {"name": "high", "chlorophyll_ugL": 20.0}, {"name": "low", "chlorophyll_ugL": 5.0}]}
    with pytest.raises(ConfigError, match=r"alerts\.levels: thresholds must increase strictly"):
        parse_config(data, SAMPLE)


def test_custom_levels_replace_the_framework_defaults():
    data = sample_data()
    data["water_bodies"][1]["alerts"] = {"framework": "custom", "levels": [
        {"name": "Watch", "chlorophyll_ugL": 5.0}, {"name": "Warning", "chlorophyll_ugL": 20.0}]}
    cfg = parse_config(data, SAMPLE)
    assert [(lv.number, lv.chlorophyll_ugL) for lv in cfg.water_bodies[1].alerts.levels] == [(1, 5.0), (2, 20.0)]


def test_push_token_from_an_unset_environment_variable_is_an_error(monkeypatch):
    monkeypatch.delenv("BLOOMLINE_TEST_TOKEN", raising=False)
    data = sample_data()
    data["feeds"].append({"name": "utility-push", "kind": "push", "token_env": "BLOOMLINE_TEST_TOKEN"})
    with pytest.raises(ConfigError, match=r"feeds\[6\]\.token_env: environment variable BLOOMLINE_TEST_TOKEN is not set"):
        parse_config(data, SAMPLE)


def test_push_token_is_read_from_the_environment(monkeypatch):
    monkeypatch.setenv("BLOOMLINE_TEST_TOKEN", "s3cret")
    data = sample_data()
    data["feeds"].append({"name": "utility-push", "kind": "push", "token_env": "BLOOMLINE_TEST_TOKEN"})
    assert parse_config(data, SAMPLE).feed("utility-push").token == "s3cret"


def test_unknown_time_zone_is_rejected():
    data = sample_data()
    data["water_bodies"][0]["timezone"] = "Mars/Olympus"
    with pytest.raises(ConfigError, match=r"water_bodies\[0\]\.timezone: unknown time zone 'Mars/Olympus'"):
        parse_config(data, SAMPLE)


def test_station_in_an_unknown_basin_is_rejected():
    data = sample_data()
    data["stations"][1]["basin"] = "north-bay"
    with pytest.raises(ConfigError, match=r"stations\[1\]\.basin: expected one of"):
        parse_config(data, SAMPLE)
