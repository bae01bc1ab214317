"""The observed alert level: phycocyanin where a basin has it, chlorophyll-a as the stand-in otherwise."""

from __future__ import annotations

import datetime as dt

import pytest

from monitor.forecasting.observed_level import latest_observed
from monitor.store.readings import readings_frame


def test_a_lake_without_phycocyanin_is_judged_on_its_extracted_chlorophyll_a(brackenfold):
    config, engine, _ = brackenfold
    wb = config.water_body("brackenfold")
    analysis = dt.datetime(2026, 7, 20, 6, 0, tzinfo=dt.UTC)
    got = latest_observed(engine, config, wb, analysis)
    day = readings_frame(engine, stations=["BF-SITE"], variables=["chlorophyll_a"],
                         start=analysis - dt.timedelta(days=1), end=analysis)
    assert len(day) == 1  # the daily lab sample of the day before
    assert got == {"main": pytest.approx(float(day.value.iloc[0]))}
