"""CSV and JSON → candidate readings: layouts, time zones, units, and the reasons for rejections."""

from __future__ import annotations

import dataclasses
import json

import numpy as np
import pandas as pd
import pytest

from monitor.ingest.cells import parse_times
from monitor.ingest.parsing import parse_payload
from monitor.ingest.tables import decode
from tests.monitor.conftest import NOW, fernwater


@pytest.fixture
def config(tmp_path):
    return fernwater(tmp_path)


def utc(s: str) -> int:
    return pd.Timestamp(s, tz="UTC").value


def test_wide_buoy_file_local_time_to_utc_and_rfu_calibration(config):
    feed = config.feed("buoys")
    payload = b"timestamp,chl,pc_rfu,temp\n2026-07-01 02:00,4.5,2.0,21.3\n2026-07-01 02:15,,1.0,21.4\n"
    p = parse_payload(payload, feed, config, origin="/drop/FW-1/2026-07.csv", now=NOW)
    assert not p.rejected
    assert set(p.station) == {"FW-1"}
    # Etc/GMT-2 is UTC+2 (POSIX sign convention): 02:00 local = 00:00 UTC
    assert p.time_ns.min() == utc("2026-07-01 00:00")
    pc = p.value[p.variable == "phycocyanin"]
    np.testing.assert_allclose(pc, [2.5 * 2.0 - 0.5, 2.5 * 1.0 - 0.5])  # the station's RFU calibration
    chl = p.value[p.variable == "chlorophyll_fluorescence"]
    assert chl[0] == 4.5 and np.isnan(chl[1])  # an empty cell is a missing reading


def test_long_lab_file_converts_units_and_keeps_below_detection_as_censored(config):
    feed = config.feed("lab")  # written below_detection = "half": an older config, read as "censored"
    assert feed.below_detection == "censored"
    payload = ("sampled_at,site,variable,value,unit\n"
               "2026-07-01 10:00,FW-LAB,nitrate,0.35,mg/L\n"
               "2026-07-01 10:00,FW-LAB,microcystin,<0.1,ug/L\n"
               "2026-07-01 10:00,FW-LAB,srp,<0.002,mg/L P\n"
               "2026-07-01 10:00,FW-LAB,chlorophyll_a,12,µg/L\n").encode()
    p = parse_payload(payload, feed, config, now=NOW)
    assert not p.rejected
    got = {v: (x, c) for v, x, c in zip(p.variable, p.value, p.censored)}
    assert got["nitrate"] == (pytest.approx(350.0), False)
    assert got["microcystin"] == (pytest.approx(0.1), True)  # censored, its detection limit (never halved)
    assert got["srp"] == (pytest.approx(2.0), True)  # the limit is converted like a value: 0.002 mg/L = 2 µg/L
    assert got["chlorophyll_a"] == (12.0, False)


def test_below_detection_reject_keeps_the_reason(config):
    feed = dataclasses.replace(config.feed("lab"), below_detection="reject")
    payload = b"sampled_at,site,variable,value,unit\n2026-07-01 10:00,FW-LAB,microcystin,<0.1,ug/L\n"
    p = parse_payload(payload, feed, config, now=NOW)
    assert len(p) == 0
    assert p.rejected[0].line == 2 and "below the detection limit" in p.rejected[0].reason


def test_every_kind_of_bad_record_is_rejected_with_line_and_reason(config):
    feed = config.feed("buoys")
    payload = (b"timestamp,chl,pc,temp\n"
               b"2026-07-01 00:00,1,2,20\n"          # 2 good
               b"2026-07-01 00:15,1,2\n"             # 3 wrong field count
               b"2026-13-01 00:30,1,2,20\n"          # 4 bad time
               b"timestamp,chl,pc,temp\n"            # 5 repeated header
               b"2026-07-01 00:45,abc,2,20\n"        # 6 non-numeric chl (pc, temp kept)
               b"2026-07-01 01:00,1e999,2,20\n"      # 7 overflow
               b"2026-07-01 01:15,1,2,20;DROP TABLE readings\n")  # 8 injection in a value
    p = parse_payload(payload, feed, config, origin="d/FW-1/x.csv", now=NOW)
    by_line = {r.line: r.reason for r in p.rejected}
    assert "expected 4 fields, got 3" == by_line[3]
    assert "does not match the time format" in by_line[4]
    assert by_line[5] == "repeated header line"
    assert "column 'chl': value 'abc' is not a finite decimal number" == by_line[6]
    assert "1e999" in by_line[7]
    assert "DROP TABLE" in by_line[8] and "not a finite decimal number" in by_line[8]
    assert sorted(set(p.line.tolist())) == [2, 6, 7, 8]
    assert set(p.record_lines) == set(range(2, 9))


def test_unknown_station_variable_and_unit_are_rejected(config):
    feed = config.feed("lab")
    payload = (b"sampled_at,site,variable,value,unit\n"
               b"2026-07-01 10:00,NOWHERE,nitrate,0.3,mg/L\n"
               b"2026-07-01 10:00,FW-LAB,salinity,3,PSU\n"
               b"2026-07-01 10:00,FW-LAB,nitrate,3,furlongs\n")
    p = parse_payload(payload, feed, config, now=NOW)
    reasons = [r.reason for r in p.rejected]
    assert reasons[0] == "unknown station 'NOWHERE'"
    assert reasons[1].startswith("unknown variable 'salinity'")
    assert reasons[2].startswith("unknown unit 'furlongs' for nitrate")


def test_duplicate_header_column_rejects_every_row_with_the_reason(config):
    feed = config.feed("buoys")
    payload = b"timestamp,chl,chl,temp\n2026-07-01 00:00,1,2,20\n2026-07-01 00:15,1,2,20\n"
    p = parse_payload(payload, feed, config, origin="d/FW-1/x.csv", now=NOW)
    assert len(p) == 0
    assert [r.reason for r in p.rejected] == ["column 'chl' appears 2 times in the header"] * 2


def test_nonexistent_local_time_in_a_daylight_saving_zone_is_rejected(config):
    feed = dataclasses.replace(config.feed("buoys"), timezone="Europe/Berlin")
    # 2026-03-29 02:30 does not exist in Europe/Berlin (clocks go 02:00 → 03:00)
    payload = b"timestamp,chl,pc,temp\n2026-03-29 01:45,1,1,5\n2026-03-29 02:30,1,1,5\n2026-03-29 03:00,1,1,5\n"
    p = parse_payload(payload, feed, config, origin="d/FW-1/x.csv", now=NOW)
    assert [r.line for r in p.rejected] == [3]
    assert "does not exist or is ambiguous in Europe/Berlin" in p.rejected[0].reason
    assert sorted(set(p.time_ns.tolist())) == [utc("2026-03-29 00:45"), utc("2026-03-29 01:00")]


def test_iso_times_with_offsets_and_naive_times_mix():
    cells = np.array(["2026-07-01T12:00:00Z", "2026-07-01T14:00:00+02:00", "2026-07-01 14:00", "yesterday"],
                     dtype=object)
    ns, ok, _ = parse_times(cells, "iso", "Etc/GMT-2")
    assert ok.tolist() == [True, True, True, False]
    assert ns[:3].tolist() == [utc("2026-07-01 12:00")] * 3


def test_readings_from_the_future_are_rejected(config):
    feed = config.feed("buoys")
    payload = b"timestamp,chl,pc,temp\n2027-01-01 00:00,1,1,5\n"
    p = parse_payload(payload, feed, config, origin="d/FW-1/x.csv", now=NOW)
    assert "in the future" in p.rejected[0].reason


def test_bom_utf16_and_latin1_payloads_decode():
    text = "timestamp,chl\n2026-07-01 00:00,1\n"
    assert decode(b"\xef\xbb\xbf" + text.encode())[0] == text
    assert decode(text.encode("utf-16"))[0] == text
    assert decode("unit\nµg/L\n".encode("latin-1")) == ("unit\nµg/L\n", "latin-1")


def test_json_list_object_and_readings_wrapper(config):
    feed = config.feed("utility")
    records = [{"time": "2026-07-01T00:00:00Z", "station": "FW-1", "variable": "water_temperature",
                "value": 20.5, "unit": "degC"},
               {"time": "2026-07-01T00:15:00Z", "station": "FW-1", "variable": "water_temperature",
                "value": None, "unit": "degC"},
               {"time": "2026-07-01T00:30:00Z", "station": "FW-1", "variable": "water_temperature",
                "value": True, "unit": "degC"},
               ["not", "an", "object"]]
    for doc in (records, {"readings": records}):
        p = parse_payload(json.dumps(doc).encode(), feed, config, now=NOW)
        assert p.value[0] == 20.5 and np.isnan(p.value[1])
        assert {r.line: r.reason for r in p.rejected} == {
            3: "field 'value' is not a string, number or null", 4: "record is not a JSON object"}
    single = parse_payload(json.dumps(records[0]).encode(), feed, config, now=NOW)
    assert len(single) == 1


def test_invalid_json_is_one_rejection(config):
    p = parse_payload(b"{not json", config.feed("utility"), config, now=NOW)
    assert len(p) == 0 and p.rejected[0].reason.startswith("not valid JSON")


def test_weather_forecast_rows_carry_their_issue_time(config):
    feed = config.feed("forecasts")
    payload = (b"issued_utc,valid_utc,air_temp_c,wind_ms\n"
               b"2026-07-01T00:00:00Z,2026-07-01T01:00:00Z,14.2,3.1\n"
               b"2026-07-01T00:00:00Z,2026-07-01T02:00:00Z,13.9,2.8\n")
    p = parse_payload(payload, feed, config, now=NOW)
    assert set(p.issued_ns.tolist()) == {utc("2026-07-01 00:00")}
    assert sorted(set(p.time_ns.tolist())) == [utc("2026-07-01 01:00"), utc("2026-07-01 02:00")]
    assert set(p.station) == {"FW-MET"}


def test_variable_names_of_the_feed_and_case_variants_map_to_canonical_names(config):
    feed = dataclasses.replace(config.feed("lab"), variable_names={"NO3-N": "nitrate", "Chl-a": "chlorophyll_a"})
    payload = (b"sampled_at,site,variable,value,unit\n"
               b"2026-07-01 10:00,FW-LAB,no3-n,0.2,mg/L\n"
               b"2026-07-01 10:00,FW-LAB,Chl-a,7,ug/L\n"
               b"2026-07-01 10:00,FW-LAB,Total Phosphorus,30,ug/L\n"
               b"2026-07-01 10:00,FW-LAB,SRP,4,ug/L\n"
               b"2026-07-01 10:00,FW-LAB,chlorophyll,4,ug/L\n")
    p = parse_payload(payload, feed, config, now=NOW)
    assert list(p.variable) == ["nitrate", "chlorophyll_a", "total_phosphorus", "srp"]
    assert p.rejected[0].reason.startswith("unknown variable 'chlorophyll'")
