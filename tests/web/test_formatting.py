"""How pages write times, chances and concentrations."""

from __future__ import annotations

import datetime as dt
from zoneinfo import ZoneInfo

import pytest

from web.formatting import chance, duration, forecast_day, local_date, local_time, reading, zone_label

UTC = dt.UTC


@pytest.mark.parametrize("p, members, shown", [
    (0.0, 60, "< 2 %"),      # no member of 60 reaches it: less than one member's share, not "0 %"
    (1.0, 60, "> 98 %"),     # every member: not "100 %"
    (1 / 60, 60, "2 %"),     # one member
    (0.42, 60, "42 %"),
    (59 / 60, 60, "98 %"),
    (0.0, 20, "< 5 %"),
    (1.0, 20, "> 95 %"),
    (None, 60, "—"),
])
def test_chance_is_shown_at_the_ensembles_resolution(p, members, shown):
    assert chance(p, members) == shown


def test_chance_never_reads_as_certainty():
    shown = {chance(k / 60, 60) for k in range(61)}
    assert "0 %" not in shown and "100 %" not in shown


def test_chance_refuses_an_empty_ensemble():
    with pytest.raises(ValueError, match="at least one member"):
        chance(0.5, 0)


def test_times_are_local_with_the_zone_named():
    t = dt.datetime(2026, 8, 10, 6, 0, tzinfo=UTC)
    assert local_time(t, ZoneInfo("Etc/GMT-2")) == "Mon 10 Aug 2026, 08:00 UTC+02:00"
    # a zone with letter abbreviations shows them, and they follow daylight saving time
    assert local_time(t, ZoneInfo("Europe/Berlin")) == "Mon 10 Aug 2026, 08:00 CEST"
    assert zone_label(dt.datetime(2026, 1, 10, tzinfo=UTC), ZoneInfo("Europe/Berlin")) == "CET"
    assert zone_label(t, ZoneInfo("America/St_Johns")) == "NDT"
    assert zone_label(t, ZoneInfo("Asia/Kolkata")) == "IST"
    assert zone_label(t, ZoneInfo("Etc/GMT+9")) == "UTC-09:00"
    assert zone_label(t, ZoneInfo("UTC")) == "UTC+00:00"


def test_days_are_local_days():
    late = dt.datetime(2026, 8, 10, 23, 30, tzinfo=UTC)
    assert local_date(late, ZoneInfo("Etc/GMT-2")) == "Tue 11 Aug 2026"
    assert local_date(late.date()) == "Mon 10 Aug 2026"
    with pytest.raises(ValueError, match="needs the time zone"):
        local_date(late)


def test_a_forecast_day_is_named_by_the_middle_of_its_24_hours():
    tz = ZoneInfo("Etc/GMT-2")
    analysis = dt.datetime(2026, 8, 9, 0, 0, tzinfo=UTC)  # 02:00 local on Sunday 9 August
    assert forecast_day(analysis, 0, tz) == "Sun 09 Aug 2026, 02:00"
    # day 1 covers Sun 02:00 to Mon 02:00 local: mostly Sunday
    assert forecast_day(analysis + dt.timedelta(days=1), 1, tz) == "Sun 09 Aug 2026"
    assert forecast_day(analysis + dt.timedelta(days=2), 2, tz) == "Mon 10 Aug 2026"


def test_durations_and_readings_in_words():
    assert duration(dt.timedelta(hours=2, minutes=59)) == "2 hours"
    assert duration(dt.timedelta(days=1, hours=1)) == "1 day 1 hour"
    assert duration(dt.timedelta(days=31)) == "31 days"
    assert reading(12.345, "ug/L") == "12.3 µg/L" and reading(6.25, "degC") == "6.25 °C"
    assert reading(None, "m3/s") == "missing"
