"""The cycle's first guess of the detrital pools from a total-P sample, and total P as an observation.

Fernwater here has two basins, a lab site in the north basin that samples
total P with SRP and chlorophyll-a, and no site in the south basin.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pytest

from assimilation.first_guess import DEFAULT_FIRST_GUESS
from assimilation.spec import StateLayout
from monitor.config import parse_config
from monitor.config.model_setup import model_spec
from monitor.forecasting.cycle import first_guess, observations_frame, station_readings, to_observations
from monitor.ingest.feeds.csv_folder import ingest_all

UTC = dt.UTC
NOW = dt.datetime(2026, 8, 3, 12, 0, tzinfo=UTC)


def _config(tmp_path: Path):
    data = {
        "service": {"database": f"sqlite:///{tmp_path / 'store.sqlite'}", "archive_dir": str(tmp_path / "archive")},
        "water_bodies": [{"id": "fernwater", "name": "Fernwater", "use": "recreation", "timezone": "UTC",
                          "basins": [{"id": "north", "volume_m3": 2e6, "mean_depth_m": 4.0, "area_m2": 5e5,
                                      "flows_to": "south"},
                                     {"id": "south", "volume_m3": 3e6, "mean_depth_m": 5.0, "area_m2": 6e5}]}],
        "stations": [{"id": "FW-LAB", "kind": "lab", "water_body": "fernwater", "basin": "north",
                      "variables": ["chlorophyll_a", "nitrate", "srp", "total_phosphorus"]}],
        "feeds": [{"name": "lab", "kind": "csv-folder", "path": str(tmp_path / "lab"), "layout": "long",
                   "time_column": "sampled_at", "time_format": "%Y-%m-%d %H:%M", "timezone": "UTC",
                   "station_column": "site"}],
    }
    return parse_config(data, tmp_path / "bloomline.toml")


@pytest.fixture
def sampled(tmp_path, sqlite_engine):
    config = _config(tmp_path)
    (tmp_path / "lab").mkdir()
    (tmp_path / "lab" / "samples.csv").write_bytes(
        b"sampled_at,site,variable,value,unit\n"
        b"2026-08-01 09:00,FW-LAB,chlorophyll_a,6.0,ug/L\n"
        b"2026-08-01 09:00,FW-LAB,srp,3.0,ug/L\n"
        b"2026-08-01 09:00,FW-LAB,nitrate,150.0,ug/L\n"
        b"2026-08-01 09:00,FW-LAB,total_phosphorus,40.0,ug/L\n")
    assert [r.status for r in ingest_all(sqlite_engine, config, now=NOW)] == ["ok"]
    return config, sqlite_engine


def test_first_guess_takes_detrital_phosphorus_from_total_p_less_srp_and_algal_p(sampled):
    config, engine = sampled
    wb = config.water_body("fernwater")
    spec = model_spec(wb)
    layout = StateLayout(spec)
    x = first_guess(engine, config, wb, spec, NOW)
    # TP = SRP + DP + a_P·chl (the total-P observation operator), so DP = 40 − 3 − a_P·6
    expected_dp = 40.0 - 3.0 - spec.phosphorus_to_chlorophyll * 6.0
    assert layout.detrital_phosphorus(x)[0] == pytest.approx(expected_dp, rel=1e-12)
    # detrital N at the algae's N:P (Redfield by mass, 7.2)
    assert layout.detrital_nitrogen(x)[0] == pytest.approx(7.2 * expected_dp, rel=1e-12)
    assert layout.phosphorus(x)[0] == 3.0 and layout.total_chlorophyll(x)[0] == pytest.approx(6.0)
    # the unsampled basin keeps the defaults
    assert layout.detrital_phosphorus(x)[1] == DEFAULT_FIRST_GUESS.detrital_phosphorus_ugL
    assert layout.detrital_nitrogen(x)[1] == DEFAULT_FIRST_GUESS.detrital_nitrogen_ugL


def test_total_phosphorus_samples_become_observations_with_the_default_lab_error(sampled):
    config, engine = sampled
    wb = config.water_body("fernwater")
    frame = station_readings(engine, config, wb, NOW - dt.timedelta(days=5), NOW)
    obs = to_observations(observations_frame(frame, config, wb, NOW - dt.timedelta(days=5)), config, wb)
    tp = obs.kind == "total_phosphorus"
    assert tp.sum() == 1
    assert obs.value[tp][0] == 40.0 and obs.basin[tp][0] == 0
    # 15 % of the value with a floor of 2 µg P/L (DEFAULT_OBSERVATION_ERRORS, lab assays ±10–15 %)
    np.testing.assert_allclose(obs.error_sd[tp], 0.15 * 40.0)
