"""The feed and station keys that say how values are read: unit maps, stored-only variables,
per-station variable names, below-detection values, detection limits and sentinels."""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

from monitor.config import ConfigError, load_config, parse_config

SAMPLE = Path(__file__).resolve().parents[3] / "sample_feeds" / "bloomline.toml"

LAKE = """
[[water_bodies]]
id = "brindle"
name = "Brindle Water"
use = "recreation"
timezone = "Etc/GMT-1"
[[water_bodies.basins]]
id = "main"
name = "Main"
volume_m3 = 3.0e6
mean_depth_m = 5.0
area_m2 = 6.0e5

[[stations]]
id = "BR-BUOY"
kind = "buoy"
water_body = "brindle"
basin = "main"
variables = ["chlorophyll_fluorescence", "water_temperature", "dissolved_oxygen", "ph"]
stored_only = ["chlorophyll_raw_volts"]
qc.chlorophyll_raw_volts = { sensor_min = 0.0, sensor_max = 5.0 }

[[stations]]
id = "BR-GRAB"
kind = "lab"
water_body = "brindle"
basin = "main"
variables = ["chlorophyll_a", "nitrate", "ammonium", "total_nitrogen", "srp"]

[[feeds]]
name = "lake-export"
kind = "csv-folder"
path = "data"
station_column = "site"
negative_means_below_detection = true
detection_limits = { nitrate = 2.0, ammonium = 5 }
sentinels = [-9999, -99.9]
sentinel_magnitude = 1e20
units = { "ug/L N (nitrate+nitrite)" = "ug/L N", "NOx-N ppb" = "ug/L N" }
variable_names = { "NO3+NO2" = "nitrate" }

[feeds.station_variable_names.BR-BUOY]
chlorophyll_a = "chlorophyll_fluorescence"
volts = "chlorophyll_raw_volts"
"""


def write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "bloomline.toml"
    path.write_text(text)
    return path


def data_of(text: str = LAKE) -> dict:
    return tomllib.loads(text)


def test_the_value_keys_load_from_toml(tmp_path):
    cfg = load_config(write(tmp_path, LAKE))
    feed = cfg.feed("lake-export")
    assert feed.station_variable_names == {"BR-BUOY": {"chlorophyll_a": "chlorophyll_fluorescence",
                                                       "volts": "chlorophyll_raw_volts"}}
    assert feed.units == {"ug/L N (nitrate+nitrite)": "ug/L N", "NOx-N ppb": "ug/L N"}
    assert feed.negative_means_below_detection and feed.detection_limits == {"nitrate": 2.0, "ammonium": 5.0}
    assert feed.sentinels == (-9999.0, -99.9) and feed.sentinel_magnitude == 1e20
    assert feed.below_detection == "censored"  # the default
    buoy = cfg.station("BR-BUOY")
    assert buoy.stored_only == ("chlorophyll_raw_volts",)
    assert buoy.qc["chlorophyll_raw_volts"] == {"sensor_min": 0.0, "sensor_max": 5.0}


def test_the_defaults_reject_the_common_fill_values():
    feed = parse_config(data_of(LAKE.replace("sentinels = [-9999, -99.9]\nsentinel_magnitude = 1e20\n", ""))
                        ).feed("lake-export")
    assert feed.sentinels == (-9999.0, -999.0) and feed.sentinel_magnitude == 1e30


@pytest.mark.parametrize("legacy", ["half", "zero"])
def test_older_below_detection_substitutions_are_read_as_censored(legacy):
    data = data_of()
    data["feeds"][0]["below_detection"] = legacy
    assert parse_config(data).feed("lake-export").below_detection == "censored"


def test_the_sample_configs_still_load():
    assert load_config(SAMPLE).feed("lab-results").below_detection == "censored"


@pytest.mark.parametrize(("edit", "key", "message"), [
    (lambda d: d["feeds"][0].update(units={"ppb-ish": "furlongs"}), r"feeds\[0\]\.units\.ppb-ish",
     r"'furlongs' is not a unit Bloomline knows; map to one such as ug/L, ug/L N, mg/L P"),
    (lambda d: d["feeds"][0].update(units={"  ": "ug/L"}), r"feeds\[0\]\.units\.  ", "got an empty key"),
    (lambda d: d["feeds"][0]["station_variable_names"].update({"BR-NOWHERE": {"x": "ph"}}),
     r"feeds\[0\]\.station_variable_names\.BR-NOWHERE", "no station 'BR-NOWHERE' in"),
    (lambda d: d["feeds"][0]["station_variable_names"]["BR-BUOY"].update(chl="chlorophyl"),
     r"feeds\[0\]\.station_variable_names\.BR-BUOY\.chl", r"expected one of .*; got 'chlorophyl'"),
    # a stored-only variable belongs to its station: the grab site cannot map to the buoy's
    (lambda d: d["feeds"][0]["station_variable_names"].update({"BR-GRAB": {"v": "chlorophyll_raw_volts"}}),
     r"feeds\[0\]\.station_variable_names\.BR-GRAB\.v", "got 'chlorophyll_raw_volts'"),
    (lambda d: d["feeds"][0].update(variable_names={"NO3": "nitrates"}), r"feeds\[0\]\.variable_names\.NO3",
     "got 'nitrates'"),
    (lambda d: d["feeds"][0].update(detection_limits={"water_temperature": 1.0}),
     r"feeds\[0\]\.detection_limits\.water_temperature", r"expected a lab analyte \(chlorophyll_a, nitrate"),
    (lambda d: d["feeds"][0].update(detection_limits={"nitrate": -2.0}), r"feeds\[0\]\.detection_limits\.nitrate",
     "expected a finite positive number, got -2.0"),
    (lambda d: d["feeds"][0].update(sentinels=[-9999, "NA"]), r"feeds\[0\]\.sentinels",
     "expected finite numbers, got 'NA'"),
    (lambda d: d["feeds"][0].update(sentinels=[float("inf")]), r"feeds\[0\]\.sentinels",
     "expected finite numbers, got inf"),
    (lambda d: d["feeds"][0].update(sentinel_magnitude=0.0), r"feeds\[0\]\.sentinel_magnitude",
     "expected a finite positive number"),
    (lambda d: d["feeds"][0].update(below_detection="drop"), r"feeds\[0\]\.below_detection",
     "expected one of censored, reject, half, zero; got 'drop'"),
    (lambda d: d["feeds"][0].update(layout="wide", columns={"t": {"variable": "ph", "unit": "-"}}),
     r"feeds\[0\]\.station_variable_names", "needs the long layout"),
    (lambda d: d["stations"][0].update(stored_only=["Raw Volts"]), r"stations\[0\]\.stored_only",
     "expected variable names of lower-case letters, digits and '_'"),
    (lambda d: d["stations"][0].update(stored_only=["ph"]), r"stations\[0\]\.stored_only",
     "'ph' is a canonical variable"),
    (lambda d: d["stations"][1].update(qc={"chlorophyll_raw_volts": {"sensor_min": 0.0}}),
     r"stations\[1\]\.qc\.chlorophyll_raw_volts", "unknown variable"),
])
def test_a_bad_value_key_is_refused_at_load_naming_the_key(edit, key, message):
    data = data_of()
    edit(data)
    with pytest.raises(ConfigError, match=rf"{key}: .*{message}"):
        parse_config(data)


def test_a_wide_column_may_name_a_stations_stored_only_variable_but_not_an_unknown_one():
    data = data_of()
    feed = data["feeds"][0]
    del feed["station_variable_names"]
    feed.update(layout="wide", station="BR-BUOY",
                columns={"v": {"variable": "chlorophyll_raw_volts", "unit": "V"}})
    assert parse_config(data).feed("lake-export").columns["v"].variable == "chlorophyll_raw_volts"
    feed["columns"]["w"] = {"variable": "chlorophyll_raw_amps", "unit": "A"}
    with pytest.raises(ConfigError, match=r"feeds\[0\]\.columns\.w\.variable: unknown variable "
                                          r"'chlorophyll_raw_amps'; expected one of"):
        parse_config(data)
