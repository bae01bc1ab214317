"""Stored readings → the filter's observations: one per station, variable and time across sources; ammonium
joins nitrate in the DIN observation; whole-day values as day means; censored readings with their limits."""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest

from monitor.forecasting.observations import one_per_source, to_observations
from monitor.timeutil import to_epoch_days
from tests.monitor.conftest import fernwater


@pytest.fixture
def config(tmp_path):
    return fernwater(tmp_path)


def frame(*rows):
    """Rows (station, variable, time, value, flag, source[, censored, limit[, whole_day]])."""
    full = [r + (False, np.nan)[len(r) - 6:] if len(r) < 8 else r for r in rows]
    full = [r if len(r) == 9 else r + (False,) for r in full]
    return pd.DataFrame({"station_id": [r[0] for r in full], "variable": [r[1] for r in full],
                         "time_utc": pd.to_datetime([r[2] for r in full], utc=True),
                         "value": [float(r[3]) for r in full], "qc_flag": [r[4] for r in full],
                         "source": [r[5] for r in full], "censored": [r[6] for r in full],
                         "detection_limit": [float(r[7]) for r in full], "whole_day": [r[8] for r in full]})


def test_the_same_reading_from_two_sources_is_one_observation_with_the_best_flag(config):
    f = frame(("FW-LAB", "chlorophyll_a", "2026-07-01 08:00", 12.0, 3, "lab"),
              ("FW-LAB", "chlorophyll_a", "2026-07-01 08:00", 11.0, 1, "utility"),
              ("FW-LAB", "srp", "2026-07-01 08:00", 4.0, 1, "utility"),
              ("FW-LAB", "srp", "2026-07-01 08:00", 5.0, 1, "lab"))
    kept = one_per_source(f, config)
    got = dict(zip(kept.variable, zip(kept.value, kept.source)))
    assert got["chlorophyll_a"] == (11.0, "utility")  # flag 1 beats flag 3
    assert got["srp"] == (5.0, "lab")  # a tie: the feed listed first in the config ("lab" before "utility")
    obs = to_observations(f, config, config.water_body("fernwater"))
    assert len(obs) == 2


def test_nitrate_and_ammonium_sampled_together_are_one_din_observation(config):
    wb = config.water_body("fernwater")
    f = frame(("FW-LAB", "nitrate", "2026-07-01 08:00", 300.0, 1, "lab"),
              ("FW-LAB", "ammonium", "2026-07-01 08:00", 50.0, 1, "lab"),
              ("FW-LAB", "ammonium", "2026-07-08 08:00", 40.0, 1, "lab"),  # no nitrate then: not assimilated
              ("FW-LAB", "nitrate", "2026-07-15 08:00", 200.0, 1, "lab"))
    obs = to_observations(f, config, wb)
    assert obs.kind.tolist() == ["nitrate", "nitrate"]
    assert obs.value.tolist() == [350.0, 200.0]
    # errors (default [observation_errors]): nitrate max(10, 0.15·300) = 45, ammonium max(5, 0.15·50) = 7.5,
    # added in quadrature
    assert obs.error_sd[0] == pytest.approx(np.hypot(45.0, 7.5))
    assert obs.error_sd[1] == pytest.approx(30.0)


def test_a_censored_part_of_din_adds_its_range(config):
    wb = config.water_body("fernwater")
    f = frame(("FW-LAB", "nitrate", "2026-07-01 08:00", 300.0, 1, "lab"),
              ("FW-LAB", "ammonium", "2026-07-01 08:00", np.nan, 9, "lab", True, 20.0),
              ("FW-LAB", "nitrate", "2026-07-08 08:00", np.nan, 9, "lab", True, 10.0),
              ("FW-LAB", "ammonium", "2026-07-08 08:00", 30.0, 1, "lab"))
    obs = to_observations(f, config, wb)
    assert obs.censored.tolist() == [False, True]
    assert obs.value[0] == pytest.approx(310.0)   # nitrate + half the ammonium's limit
    assert obs.error_sd[0] == pytest.approx(np.hypot(45.0, 10.0))
    assert obs.value[1] == pytest.approx(40.0)   # DIN below the nitrate's limit + the ammonium


def test_censored_readings_carry_their_limit_and_those_without_one_are_left_out(config):
    wb = config.water_body("fernwater")
    f = frame(("FW-LAB", "srp", "2026-07-01 08:00", np.nan, 9, "lab", True, 2.0),
              ("FW-LAB", "srp", "2026-07-02 08:00", np.nan, 9, "lab", True, np.nan))
    obs = to_observations(f, config, wb)
    assert obs.censored.tolist() == [True] and obs.value.tolist() == [2.0]


def test_whole_day_values_are_means_over_the_water_bodys_local_day(config):
    wb = dataclasses.replace(config.water_body("fernwater"), timezone="Europe/London")
    f = frame(("FW-LAB", "chlorophyll_a", "2026-03-29 23:00", 12.0, 1, "lab", False, np.nan, True),
              ("FW-LAB", "chlorophyll_a", "2026-07-01 23:00", 10.0, 1, "lab", False, np.nan, True),
              ("FW-LAB", "chlorophyll_a", "2026-07-02 08:00", 9.0, 1, "lab", False, np.nan, False))
    obs = to_observations(f, config, wb)
    # Europe/London (IANA tz database): 2026-03-29 is the first day of BST, 23 hours long
    np.testing.assert_allclose(obs.span_d, [23 / 24, 1.0, 0.0])
    np.testing.assert_allclose(obs.time_d, to_epoch_days(f.time_utc))  # stamped at the end of the day
