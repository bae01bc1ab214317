"""Loading refuses what would fail at cycle time: unknown keys anywhere, filter options and model
constants the numerics refuse; ``bloomline check-config`` exits non-zero on each."""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

import pytest
from click.testing import CliRunner

from monitor.app.cli import main
from monitor.config import ConfigError, load_config, parse_config

SAMPLE = Path(__file__).resolve().parents[3] / "sample_feeds" / "bloomline.toml"
JANUARY_TO_DECEMBER = [[0.0, 40.0]] * 12


def sample_data() -> dict:
    return tomllib.loads(SAMPLE.read_text())


def with_every_table() -> dict:
    """The sample config plus the optional tables it leaves out, so that every kind of table is present."""
    data = sample_data()
    data["qc"] = {"phycocyanin": {"spike_fail": 30.0}}
    data["observation_errors"] = {"phycocyanin": {"fraction": 0.2, "floor": 0.3}}
    data["water_bodies"][1]["alerts"] = {"framework": "custom", "levels": [
        {"name": "Watch", "chlorophyll_ugL": 5.0}, {"name": "Warning", "chlorophyll_ugL": 20.0}]}
    station = data["stations"][0]
    station["qc"] = {"phycocyanin": {"spike_fail": 30.0}}
    station["climatology"] = {"phycocyanin": JANUARY_TO_DECEMBER}
    data["feeds"][0]["variable_names"] = {"PC": "phycocyanin"}
    station["stored_only"] = ["chlorophyll_raw_volts"]
    lab = next(f for f in data["feeds"] if f["name"] == "lab-results")
    lab["units"] = {"ug/L N (nitrate+nitrite)": "ug/L N"}
    lab["detection_limits"] = {"nitrate": 2.0}
    lab["station_variable_names"] = {station["id"]: {"chlorophyll_a": "chlorophyll_fluorescence"}}
    return data


def tables(node: dict, prefix: str = ""):
    """(dotted key, table) of ``node`` and every table inside it."""
    yield prefix, node
    for name, value in node.items():
        key = f"{prefix}.{name}" if prefix else name
        if isinstance(value, dict):
            yield from tables(value, key)
        elif isinstance(value, list) and value and all(isinstance(v, dict) for v in value):
            for i, item in enumerate(value):
                yield from tables(item, f"{key}[{i}]")


def write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "bloomline.toml"
    path.write_text(text)
    return path


def test_the_extended_sample_is_valid_so_each_refusal_below_is_the_added_key():
    parse_config(with_every_table(), SAMPLE)


def test_an_unknown_key_in_any_table_is_refused_with_file_and_dotted_key():
    keys = [key for key, _ in tables(with_every_table())]
    assert {"", "service", "filter", "qc.phycocyanin", "water_bodies[0].model", "water_bodies[1].alerts.levels[0]",
            "water_bodies[0].inflows[0]", "stations[0].climatology", "feeds[0].columns.chl_fluor",
            "feeds[0].variable_names", "subscribers[0]", "feeds[2].units", "feeds[2].detection_limits",
            "feeds[2].station_variable_names", "feeds[2].station_variable_names.CR-FA"} <= set(keys)
    for key in keys:
        data = with_every_table()
        table = dict(tables(data))[key]
        table["unexpected_option"] = 1
        dotted = f"{key}.unexpected_option" if key else "unexpected_option"
        with pytest.raises(ConfigError, match=rf"bloomline\.toml: {re.escape(dotted)}: "):
            parse_config(data, SAMPLE)


def test_an_unknown_filter_key_is_refused_at_load_naming_file_and_key(tmp_path):
    path = write(tmp_path, SAMPLE.read_text().replace("members = 60", "members = 60\nmembres = 40"))
    with pytest.raises(ConfigError, match=r"bloomline\.toml: filter\.membres: unknown key; expected one of members, "):
        load_config(path)


def test_filter_fields_set_from_bloomline_keys_cannot_be_given_twice():
    data = sample_data()
    data["filter"]["window_d"] = 2.0  # FilterConfig's name for [filter] window_days
    with pytest.raises(ConfigError, match=r"filter\.window_d: unknown key"):
        parse_config(data, SAMPLE)


def test_a_filter_option_out_of_the_filters_range_is_refused_at_its_key():
    data = sample_data()
    data["filter"]["inflation"] = 0.5
    with pytest.raises(ConfigError, match=r"bloomline\.toml: filter\.inflation: FilterConfig\.inflation must be >= 1"):
        parse_config(data, SAMPLE)


def test_a_filter_option_of_the_wrong_type_is_refused():
    data = sample_data()
    data["filter"]["estimate_parameters"] = "yes"
    with pytest.raises(ConfigError, match=r"filter\.estimate_parameters: expected true or false, got 'yes'"):
        parse_config(data, SAMPLE)


def test_an_unknown_filter_method_is_refused_at_load():
    data = sample_data()
    data["filter"]["method"] = "optimal"
    with pytest.raises(ConfigError, match=r"filter\.method: FilterConfig\.method must be one of"):
        parse_config(data, SAMPLE)


def test_a_recycled_fraction_above_one_is_refused_at_load(tmp_path):
    text = SAMPLE.read_text().replace("sediment_phosphorus_release_20_mg_m2_d = 0.5",
                                      "sediment_phosphorus_release_20_mg_m2_d = 0.5\nrecycled_fraction = 1.5")
    with pytest.raises(ConfigError, match=r"bloomline\.toml: water_bodies\[1\]\.model\.recycled_fraction: "
                                          r"recycled_fraction must be in \[0, 1\], got 1\.5"):
        load_config(write(tmp_path, text))


def test_a_zero_par_fraction_is_refused_as_the_model_refuses_it():
    data = sample_data()
    data["water_bodies"][0]["model"]["par_fraction"] = 0.0
    with pytest.raises(ConfigError, match=r"water_bodies\[0\]\.model\.par_fraction: par_fraction must be positive"):
        parse_config(data, SAMPLE)


def test_a_basin_flowing_into_itself_is_a_loop():
    data = sample_data()
    data["water_bodies"][1]["basins"][0]["flows_to"] = data["water_bodies"][1]["basins"][0]["id"]
    with pytest.raises(ConfigError, match=r"water_bodies\[1\]\.basins: the flow network has a loop"):
        parse_config(data, SAMPLE)


def test_an_infinite_basin_volume_is_refused_at_the_basin():
    data = sample_data()
    data["water_bodies"][1]["basins"][0]["volume_m3"] = float("inf")
    with pytest.raises(ConfigError,
                       match=r"water_bodies\[1\]\.basins\[0\]: Basin 'main': volume_m3 must be a positive"):
        parse_config(data, SAMPLE)


@pytest.mark.parametrize(("original", "replacement", "message"), [
    ("members = 60", "members = 60\nmembres = 40", "filter.membres: unknown key"),
    ("sediment_phosphorus_release_20_mg_m2_d = 0.5", "recycled_fraction = 1.5",
     "water_bodies[1].model.recycled_fraction: recycled_fraction must be in [0, 1]"),
    ('[service]', '[service]\ndatabse = "sqlite:///x.sqlite"', "service.databse: unknown key"),
])
def test_check_config_exits_non_zero_naming_file_and_key(tmp_path, original, replacement, message):
    text = SAMPLE.read_text()
    assert original in text
    path = write(tmp_path, text.replace(original, replacement, 1))
    result = CliRunner().invoke(main, ["check-config", str(path)])
    assert result.exit_code == 1, result.output
    assert f"bloomline.toml: {message}" in result.output
