"""Lookups by id on a Config agree with scanning its lists, and follow a replaced Config."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pytest

from monitor.config import load_config

SAMPLE = Path(__file__).resolve().parents[3] / "sample_feeds" / "bloomline.toml"


@pytest.fixture(scope="module")
def cfg():
    return load_config(SAMPLE)


def test_station_water_body_and_feed_are_found_by_id(cfg):
    for st in cfg.stations:
        assert cfg.station(st.id) is st
    for wb in cfg.water_bodies:
        assert cfg.water_body(wb.id) is wb
    for fd in cfg.feeds:
        assert cfg.feed(fd.name) is fd


def test_unknown_ids_raise_key_errors_naming_them(cfg):
    with pytest.raises(KeyError, match="unknown station 'XX-9'"):
        cfg.station("XX-9")
    with pytest.raises(KeyError, match="unknown water body 'atlantis'"):
        cfg.water_body("atlantis")
    with pytest.raises(KeyError, match="unknown feed 'nope'"):
        cfg.feed("nope")


def test_stations_of_matches_a_scan_for_every_water_body_basin_and_variable(cfg):
    variables = sorted({v for s in cfg.stations for v in s.variables})
    for wb in cfg.water_bodies:
        assert cfg.stations_of(wb.id) == tuple(s for s in cfg.stations if s.water_body == wb.id)
        for basin in [None, *(b.id for b in wb.basins)]:
            for variable in [None, *variables]:
                expected = tuple(s for s in cfg.stations if s.water_body == wb.id
                                 and (basin is None or s.basin == basin)
                                 and (variable is None or variable in s.variables))
                assert cfg.stations_of(wb.id, basin=basin, variable=variable) == expected


def test_stations_of_an_unknown_water_body_is_empty(cfg):
    assert cfg.stations_of("atlantis") == ()


def test_a_replaced_config_indexes_its_own_stations(cfg):
    kept = tuple(s for s in cfg.stations if s.id != "CR-MR")
    smaller = dataclasses.replace(cfg, stations=kept)
    assert "CR-MR" not in [s.id for s in smaller.stations_of("corrisdale")]
    with pytest.raises(KeyError, match="unknown station 'CR-MR'"):
        smaller.station("CR-MR")
    assert smaller == dataclasses.replace(cfg, stations=kept)  # indexes take no part in equality
