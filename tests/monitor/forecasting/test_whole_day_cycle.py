"""A whole-day value is available to the filter only once its local day has ended (no look-ahead), and
censored readings reach the filter with their limits."""

from __future__ import annotations

import datetime as dt

import numpy as np

from monitor.forecasting.cycle import gather
from monitor.ingest.batches import ingest_bytes
from tests.monitor.conftest import NOW, fernwater, lab_csv

UTC = dt.UTC


def test_a_days_value_is_not_seen_by_the_cycle_at_its_start_and_is_seen_by_the_cycle_at_its_end(
        tmp_path, sqlite_engine):
    config = fernwater(tmp_path)
    feed, payload = lab_csv(config, "2026-07-02,FW-LAB,chlorophyll_a,12,ug/L", "2026-07-02T10:00,FW-LAB,srp,<2,ug/L")
    r = ingest_bytes(sqlite_engine, config, feed, payload, "lab/a.csv", now=NOW)
    assert (r.accepted, r.rejected) == (2, 0)
    wb = config.water_body("fernwater")
    # fernwater is UTC+2: local midnight starting 2026-07-02 is 2026-07-01 22:00 UTC
    start_of_day = dt.datetime(2026, 7, 1, 22, tzinfo=UTC)
    at_start = gather(sqlite_engine, config, wb, start_of_day, replay=True)
    assert "chlorophyll_a" not in at_start.observations.kind.tolist()
    just_before_end = gather(sqlite_engine, config, wb, start_of_day + dt.timedelta(hours=23, minutes=59),
                             replay=True)
    assert "chlorophyll_a" not in just_before_end.observations.kind.tolist()
    at_end = gather(sqlite_engine, config, wb, start_of_day + dt.timedelta(days=1), replay=True)
    obs = at_end.observations
    chl = obs.kind == "chlorophyll_a"
    assert chl.sum() == 1 and obs.span_d[chl][0] == 1.0 and obs.value[chl][0] == 12.0
    srp = obs.kind == "srp"
    assert obs.censored[srp].tolist() == [True] and np.allclose(obs.value[srp], 2.0)
