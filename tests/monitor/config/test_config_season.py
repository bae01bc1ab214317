"""The monitoring season, the cold-start gap and a station's reporting delay in the config."""

from __future__ import annotations

import datetime as dt
import tomllib
from pathlib import Path

import pytest

from monitor.config import ConfigError, parse_config

SAMPLE = Path(__file__).resolve().parents[3] / "sample_feeds" / "bloomline.toml"
UTC = dt.UTC


def config_with(season=None, gap=None, delay=None):
    data = tomllib.loads(SAMPLE.read_text())
    if season is not None:
        data["water_bodies"][0]["season"] = season
    if gap is not None:
        data.setdefault("filter", {})["cold_start_gap_days"] = gap
    if delay is not None:
        data["stations"][0]["reporting_delay_days"] = delay
    return parse_config(data, SAMPLE)


def test_season_gap_and_delay_are_read_with_their_defaults():
    plain = config_with()
    assert plain.water_bodies[0].season is None and plain.filter.cold_start_gap_days == 30.0
    assert plain.stations[0].reporting_delay_days == 0.0
    c = config_with(season=["04-01", "10-31"], gap=45, delay=3)
    assert c.water_bodies[0].season == ((4, 1), (10, 31))
    assert c.filter.cold_start_gap_days == 45.0 and c.stations[0].reporting_delay_days == 3.0


def test_a_season_holds_its_local_dates_and_may_wrap_the_new_year():
    wb = config_with(season=["04-01", "10-31"]).water_bodies[0]
    tz = wb.timezone
    assert wb.in_season(dt.datetime(2026, 4, 1, 12, tzinfo=UTC)) and wb.in_season(dt.datetime(2026, 10, 31, 12,
                                                                                                tzinfo=UTC))
    assert not wb.in_season(dt.datetime(2026, 3, 31, 12, tzinfo=UTC))
    assert not wb.in_season(dt.datetime(2026, 11, 1, 12, tzinfo=UTC))
    winter = config_with(season=["11-01", "03-31"]).water_bodies[0]
    assert winter.in_season(dt.datetime(2026, 1, 15, 12, tzinfo=UTC)) and not winter.in_season(
        dt.datetime(2026, 6, 15, 12, tzinfo=UTC))
    assert tz  # the season is in the water body's own time zone


@pytest.mark.parametrize("season, message", [
    (["04-01"], "MM-DD"), (["04-31", "10-31"], "not a month-day"), (["4/1", "10-31"], "not a month-day"),
    (["04-01", "04-01"], "the same"),
])
def test_a_bad_season_is_refused_with_a_reason(season, message):
    with pytest.raises(ConfigError, match=message):
        config_with(season=season)


@pytest.mark.parametrize("delay", [-1, 400])
def test_a_bad_reporting_delay_is_refused(delay):
    with pytest.raises(ConfigError, match="reporting_delay_days"):
        config_with(delay=delay)
