"""Whole-day values: a date without a time of day is the whole local day of the station's water body,
stamped at the end of that day and marked ``whole_day`` in the store."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from monitor.ingest.batches import ingest_bytes
from monitor.ingest.cells import date_only, day_ends
from monitor.ingest.parsing import parse_payload
from monitor.store.readings import readings_frame
from tests.monitor.conftest import NOW, fernwater, lab_csv


def utc_ns(s: str) -> int:
    return pd.Timestamp(s, tz="UTC").value


def test_date_only_cells_are_told_from_times_of_day():
    cells = np.array(["2026-06-03", " 2026-06-03 ", "2026-06-03T00:00", "2026-06-03 10:00", "2026-06-03Z"],
                     dtype=object)
    assert date_only(cells, "iso").tolist() == [True, True, False, False, False]
    assert date_only(cells[:1], "%d/%m/%Y").tolist() == [True]
    assert date_only(cells[:1], "%d/%m/%Y %H:%M").tolist() == [False]


def test_a_local_day_ends_at_the_next_local_midnight_also_across_daylight_saving():
    cells = np.array(["2026-03-29", "2026-10-25", "2026-07-01", "2026-07-01"], dtype=object)
    zones = np.array(["Europe/London", "Europe/London", "Europe/London", "Etc/GMT-2"], dtype=object)
    ends, ok = day_ends(cells, "iso", zones)
    assert ok.all()
    # Europe/London (IANA tz database): BST (UTC+1) from 2026-03-29 01:00 UTC to 2026-10-25 01:00 UTC
    assert ends.tolist() == [utc_ns("2026-03-29 23:00"),   # a 23-hour day: midnight after it is BST
                             utc_ns("2026-10-26 00:00"),   # a 25-hour day: midnight after it is GMT
                             utc_ns("2026-07-01 23:00"),
                             utc_ns("2026-07-01 22:00")]   # Etc/GMT-2 is UTC+2 (POSIX sign convention)


@pytest.fixture
def config(tmp_path):
    return fernwater(tmp_path)


def test_a_date_without_time_is_a_whole_day_value_at_the_end_of_the_water_bodys_local_day(config):
    feed, payload = lab_csv(config, "2026-07-01,FW-LAB,chlorophyll_a,12,ug/L", "2026-07-01T10:00,FW-LAB,chlorophyll_a,11,ug/L")
    p = parse_payload(payload, feed, config, now=NOW)
    assert not p.rejected
    assert p.whole_day.tolist() == [True, False]
    # fernwater's time zone Etc/GMT-2 = UTC+2: the day ends at 2026-07-02 00:00 local = 2026-07-01 22:00 UTC
    assert p.time_ns.tolist() == [utc_ns("2026-07-01 22:00"), utc_ns("2026-07-01 08:00")]


def test_a_whole_day_value_of_today_is_accepted_and_one_of_the_day_after_tomorrow_is_rejected(config):
    feed, payload = lab_csv(config, "2026-09-01,FW-LAB,chlorophyll_a,12,ug/L", "2026-09-03,FW-LAB,chlorophyll_a,11,ug/L")
    p = parse_payload(payload, feed, config, now=NOW)
    assert p.whole_day.tolist() == [True]
    assert [r.reason for r in p.rejected] == ["time is more than a day in the future (clock or time zone wrong?)"]


@pytest.mark.postgres
def test_whole_day_values_are_stored_marked_and_read_back(tmp_path, engine):
    config = fernwater(tmp_path)
    feed, payload = lab_csv(config, "2026-07-01,FW-LAB,chlorophyll_a,12,ug/L", "2026-07-02T10:00,FW-LAB,chlorophyll_a,11,ug/L")
    r = ingest_bytes(engine, config, feed, payload, "lab/a.csv", now=NOW)
    assert (r.accepted, r.rejected) == (2, 0)
    again = ingest_bytes(engine, config, feed, payload + b"\n", "lab/b.csv", now=NOW)
    assert (again.accepted, again.duplicate, again.rejected) == (0, 2, 0)  # the same day again is one reading
    frame = readings_frame(engine, max_flag=9)
    assert frame["whole_day"].tolist() == [True, False]
    assert frame["time_utc"].iloc[0] == pd.Timestamp("2026-07-01 22:00", tz="UTC")
