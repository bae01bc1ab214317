"""Cells → values: sentinels, overflowing conversions, censored values, annotated units, stored-only
variables and per-station variable names, each with its reason when refused."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from monitor.ingest.parsing import parse_payload
from tests.monitor.conftest import NOW, fernwater

HEADER = "sampled_at,site,variable,value,unit\n"


@pytest.fixture
def config(tmp_path):
    return fernwater(tmp_path)


def lab_csv(*rows: str) -> bytes:
    return (HEADER + "".join(f"2026-07-01 10:{k:02d},{r}\n" for k, r in enumerate(rows))).encode()


def by_line(p) -> dict:
    return {r.line: r.reason for r in p.rejected}


def test_sentinels_are_rejected_with_the_reason_never_stored(config):
    p = parse_payload(lab_csv("FW-LAB,nitrate,-9999,ug/L", "FW-LAB,srp,-999.0,ug/L", "FW-LAB,srp,1e308,mg/L",
                              "FW-LAB,nitrate,-1E+30,ug/L", "FW-LAB,chlorophyll_a,9.9e29,ug/L",
                              "FW-LAB,chlorophyll_a,-9999.5,ug/L"),
                      config.feed("lab"), config, now=NOW)
    reasons = by_line(p)
    assert sorted(reasons) == [2, 3, 4, 5]
    assert reasons[2] == ("value '-9999' is a fill value (sentinel: -9999, -999 or magnitude ≥ 1e+30), "
                          "not a reading")
    assert all("fill value" in reasons[k] for k in (3, 4, 5))
    assert p.value.tolist() == [9.9e29, -9999.5]  # not sentinels: kept for QC to judge


def test_a_feed_names_its_own_sentinels(config):
    feed = dataclasses.replace(config.feed("lab"), sentinels=(-99.0,), sentinel_magnitude=1e6)
    p = parse_payload(lab_csv("FW-LAB,nitrate,-99,ug/L", "FW-LAB,nitrate,-9999,ug/L", "FW-LAB,nitrate,2e6,ug/L"),
                      feed, config, now=NOW)
    assert sorted(by_line(p)) == [2, 4]
    assert p.value.tolist() == [-9999.0]


def test_a_conversion_that_overflows_is_rejected_not_stored_as_infinity(config):
    feed = dataclasses.replace(config.feed("lab"), sentinel_magnitude=1e305)
    p = parse_payload(lab_csv("FW-LAB,nitrate,1e300,g/L", "FW-LAB,nitrate,1e28,mg/L", "FW-LAB,nitrate,2,mg/L"),
                      feed, config, now=NOW)
    reasons = by_line(p)
    # 1e300 g/L × 10⁶ µg/g overflows a double; 1e28 mg/L × 10³ = 1e31 stays below this feed's 1e305
    assert reasons == {2: "value 1e+300 g/L overflows when converted to ug/L N (beyond ±1e+305)"}
    assert p.value.tolist() == [1e31, 2000.0]
    default = parse_payload(lab_csv("FW-LAB,nitrate,1e28,mg/L"), config.feed("lab"), config, now=NOW)
    assert by_line(default) == {2: "value 1e+28 mg/L overflows when converted to ug/L N (beyond ±1e+30)"}
    assert np.isfinite(p.value).all()


def test_below_detection_is_censored_with_its_limit_or_rejected(config):
    rows = ("FW-LAB,microcystin,<0.1,ug/L", "FW-LAB,srp,< 0.004,mg/L P", "FW-LAB,nitrate,<0,ug/L",
            "FW-LAB,nitrate,<-9999,ug/L", "FW-LAB,nitrate,<1e31,ug/L")
    p = parse_payload(lab_csv(*rows), config.feed("lab"), config, now=NOW)
    assert p.variable.tolist() == ["microcystin", "srp"] and p.censored.tolist() == [True, True]
    assert p.value.tolist() == [0.1, pytest.approx(4.0)]  # the limits, in µg/L
    reasons = by_line(p)
    assert reasons[4] == "value '<0': a detection limit must be positive"
    assert "fill value" in reasons[5] and "fill value" in reasons[6]
    rejecting = dataclasses.replace(config.feed("lab"), below_detection="reject")
    p = parse_payload(lab_csv(rows[0]), rejecting, config, now=NOW)
    assert len(p) == 0 and "below the detection limit (the feed's below_detection is 'reject')" in p.rejected[0].reason


def test_negative_lab_values_are_censored_where_the_feed_says_so(config):
    rows = ("FW-LAB,nitrate,-0.003,mg/L", "FW-LAB,srp,-1.2,ug/L", "FW-LAB,nitrate,0,mg/L",
            "FW-1,water_temperature,-0.5,degC", "FW-1,chlorophyll_fluorescence,-0.4,ug/L")
    plain = parse_payload(lab_csv(*rows), config.feed("lab"), config, now=NOW)
    assert not plain.censored.any() and plain.value.tolist() == [-3.0, -1.2, 0.0, -0.5, -0.4]
    feed = dataclasses.replace(config.feed("lab"), negative_means_below_detection=True,
                               detection_limits={"nitrate": 2.0})
    p = parse_payload(lab_csv(*rows), feed, config, now=NOW)
    assert not p.rejected
    assert p.censored.tolist() == [True, True, False, False, False]
    # nitrate: the feed's limit (µg N/L, not converted again); srp: below an unstated limit
    np.testing.assert_array_equal(p.value, [2.0, np.nan, 0.0, -0.5, -0.4])


def test_an_annotated_unit_is_read_without_its_annotation_and_noted(config):
    p = parse_payload(lab_csv("FW-LAB,nitrate,120,ug/L N (nitrate+nitrite)",
                              "FW-LAB,chlorophyll_a,7,ug/L (extracted; lab)",
                              "FW-LAB,nitrate,121,ug/L N (nitrate+nitrite)"), config.feed("lab"), config, now=NOW)
    assert not p.rejected and p.value.tolist() == [120.0, 7.0, 121.0]
    assert [n for n in p.notes if "annotation" in n] == [
        "unit 'ug/L N (nitrate+nitrite)' read as 'ug/L N' (annotation in parentheses ignored)",
        "unit 'ug/L (extracted; lab)' read as 'ug/L' (annotation in parentheses ignored)"]


def test_a_feeds_unit_map_applies_before_the_tables(config):
    feed = dataclasses.replace(config.feed("lab"), units={"NOx-N ppm": "mg/L N"})
    p = parse_payload(lab_csv("FW-LAB,nitrate,0.12,NOx-N ppm"), feed, config, now=NOW)
    assert not p.rejected and p.value.tolist() == [pytest.approx(120.0)]
    p = parse_payload(lab_csv("FW-LAB,nitrate,0.12,NOx-N ppm"), config.feed("lab"), config, now=NOW)
    assert p.rejected[0].reason.startswith("unknown unit 'NOx-N ppm' for nitrate; expected ug/L N, mg/L N")


def test_new_canonical_variables_are_accepted_and_unknown_ones_rejected(config):
    p = parse_payload(lab_csv("FW-LAB,ammonium,0.02,mg/L N", "FW-LAB,Total Nitrogen,0.9,mg/L",
                              "FW-1,dissolved_oxygen,9.1,mg/L", "FW-1,oxygen_saturation,101,%", "FW-1,pH,8.4,-",
                              "FW-1,turbidity,3.2,FNU", "FW-1,specific_conductance,0.31,mS/cm",
                              "FW-1,secchi_depth,1.8,m", "FW-1,salinity,0.2,PSU"),
                      config.feed("lab"), config, now=NOW)
    assert p.variable.tolist() == ["ammonium", "total_nitrogen", "dissolved_oxygen", "oxygen_saturation", "ph",
                                   "turbidity", "specific_conductance", "secchi_depth"]
    np.testing.assert_allclose(p.value, [20.0, 900.0, 9.1, 101.0, 8.4, 3.2, 310.0, 1.8])
    assert p.rejected[0].reason.startswith("unknown variable 'salinity'; expected one of ")
    assert p.rejected[0].reason.endswith("or a variable the station declares stored_only")


def test_a_stations_stored_only_variable_is_kept_as_sent_with_its_unit(tmp_path):
    config = fernwater(tmp_path)
    stations = [dataclasses.replace(s, stored_only=("chlorophyll_raw_volts",)) if s.id == "FW-1" else s
                for s in config.stations]
    config = dataclasses.replace(config, stations=tuple(stations))
    p = parse_payload(lab_csv("FW-1,chlorophyll_raw_volts,0.734,V", "FW-1,Chlorophyll Raw Volts,0.9,mV (x10)",
                              "FW-LAB,chlorophyll_raw_volts,0.7,V"), config.feed("lab"), config, now=NOW)
    assert p.variable.tolist() == ["chlorophyll_raw_volts"] * 2 and p.value.tolist() == [0.734, 0.9]
    assert p.unit.tolist() == ["V", "mV (x10)"]
    assert by_line(p)[4].startswith("unknown variable 'chlorophyll_raw_volts'")  # not declared at FW-LAB


def test_per_station_variable_names_let_one_file_mean_two_things(config):
    feed = dataclasses.replace(config.feed("lab"), variable_names={"Chl": "chlorophyll_a"},
                               station_variable_names={"FW-1": {"chl": "chlorophyll_fluorescence",
                                                                "chlorophyll_a": "chlorophyll_fluorescence"}})
    p = parse_payload(lab_csv("FW-1,chlorophyll_a,4.2,ug/L", "FW-LAB,chlorophyll_a,5.1,ug/L", "FW-1,CHL,4.3,ug/L",
                              "FW-LAB,chl,5.0,ug/L"), feed, config, now=NOW)
    assert not p.rejected
    assert list(zip(p.station, p.variable)) == [("FW-1", "chlorophyll_fluorescence"), ("FW-LAB", "chlorophyll_a"),
                                                ("FW-1", "chlorophyll_fluorescence"), ("FW-LAB", "chlorophyll_a")]


def test_a_weather_forecast_below_a_detection_limit_is_refused(tmp_path, sqlite_engine):
    from monitor.ingest.batches import ingest_bytes
    from monitor.store.readings import rejected_rows_frame

    config = fernwater(tmp_path)
    payload = b"issued_utc,valid_utc,air_temp_c,wind_ms\n2026-07-01T00:00:00Z,2026-07-01T01:00:00Z,14.2,<0.5\n"
    r = ingest_bytes(sqlite_engine, config, config.feed("forecasts"), payload, "fc.csv", now=NOW)
    assert (r.accepted, r.rejected) == (1, 1)
    assert rejected_rows_frame(sqlite_engine)["reason"].tolist() == [
        "a forecast wind_speed cannot be below a detection limit"]
