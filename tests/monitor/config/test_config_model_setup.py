"""The model spec and filter settings built from a configuration are the ones the cycle runs with."""

from __future__ import annotations

import dataclasses
import tomllib
from pathlib import Path

from assimilation.spec import ModelSpec
from monitor.config import MODEL_KEYS, chlorophyll_sensors, filter_config, load_config, model_spec, parse_config
from monitor.config.model_setup import filter_option_kinds

SAMPLE = Path(__file__).resolve().parents[3] / "sample_feeds" / "bloomline.toml"


def sample_data() -> dict:
    return tomllib.loads(SAMPLE.read_text())


def test_every_overridable_model_constant_is_a_model_spec_field():
    assert set(MODEL_KEYS) <= {f.name for f in dataclasses.fields(ModelSpec)}


def test_model_spec_carries_the_basins_network_and_overrides_of_the_file():
    cfg = load_config(SAMPLE)
    res = cfg.water_body("corrisdale")
    spec = model_spec(res)
    assert [b.name for b in spec.basins] == ["fennick-arm", "middle-reach", "dam-basin"]
    assert spec.network.downstream == (1, 2, -1)  # fennick-arm → middle-reach → dam-basin → outlet
    assert spec.basins[0].volume_m3 == res.basins[0].volume_m3
    assert spec.sediment_phosphorus_release_20_mg_m2_d == 10.0  # [water_bodies.model] of corrisdale
    assert len(spec.network.inflow_basin) == len(res.inflows)


def test_filter_options_of_the_file_reach_the_filter_config():
    data = sample_data()
    data["filter"].update({"inflation": 1.1, "localization_hops": 2, "estimate_parameters": False})
    cfg = parse_config(data, SAMPLE)
    fc = filter_config(cfg, cfg.water_body("sorrel-lake"))
    assert (fc.inflation, fc.localization_hops, fc.estimate_parameters) == (1.1, 2.0, False)
    assert (fc.members, fc.method, fc.window_d) == (cfg.filter.members, cfg.filter.method, cfg.filter.window_days)


def test_one_sensor_gain_per_chlorophyll_fluorometer_of_the_water_body_in_file_order():
    cfg = load_config(SAMPLE)
    res = cfg.water_body("corrisdale")
    expected = tuple(s.id for s in cfg.stations
                     if s.water_body == "corrisdale" and "chlorophyll_fluorescence" in s.variables)
    assert chlorophyll_sensors(cfg, res) == expected == ("CR-FA", "CR-MR", "CR-DB")
    assert filter_config(cfg, res).n_sensors == 3


def test_filter_options_exclude_the_fields_bloomline_sets_itself():
    kinds = filter_option_kinds()
    assert {"members", "method", "window_d", "n_sensors"}.isdisjoint(kinds)
    assert kinds["inflation"] == (float,) and kinds["estimate_parameters"] == (bool,)
