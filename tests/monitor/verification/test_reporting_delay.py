"""A station's reporting delay in a replay: a reading is available at its time plus the delay, and once
available it is re-analysed from the checkpoint before it."""

from __future__ import annotations

import dataclasses
import datetime as dt

import pytest

from monitor.forecasting.cycle import gather
from monitor.ingest.batches import ingest_bytes
from monitor.store import runs as store
from tests.monitor.conftest import NOW, fernwater

UTC = dt.UTC
D = dt.datetime(2026, 7, 1, tzinfo=UTC)


def delayed_config(tmp_path, days=3.0):
    config = fernwater(tmp_path)
    stations = tuple(dataclasses.replace(s, reporting_delay_days=days) if s.id == "FW-LAB" else s
                     for s in config.stations)
    return dataclasses.replace(config, stations=stations)


def kinds(inputs):
    return inputs.observations.kind.tolist()


def test_a_replay_sees_a_lab_reading_only_after_its_reporting_delay_and_then_re_analyses_it(tmp_path,
                                                                                          sqlite_engine):
    config = delayed_config(tmp_path)
    payload = b"sampled_at,site,variable,value,unit\n2026-07-01 12:00,FW-LAB,chlorophyll_a,12,ug/L\n"
    assert ingest_bytes(sqlite_engine, config, config.feed("lab"), payload, "lab/a.csv", now=NOW).accepted == 1
    wb = config.water_body("fernwater")
    store.sync_config(sqlite_engine, config)
    for day in (0, 1, 2, 3):  # the checkpoints of the daily cycles before the reading became available
        store.save_checkpoint(sqlite_engine, wb.id, D + dt.timedelta(days=day), b"x", now=NOW)
    # sampled 2026-07-01 10:00 UTC (12:00 at UTC+2), available 2026-07-04 10:00 UTC
    at_day_1 = gather(sqlite_engine, config, wb, D + dt.timedelta(days=1), replay=True)
    assert "chlorophyll_a" not in kinds(at_day_1) and at_day_1.late_note == ""
    at_day_4 = gather(sqlite_engine, config, wb, D + dt.timedelta(days=4), replay=True)
    assert "chlorophyll_a" in kinds(at_day_4)
    assert at_day_4.start_d == pytest.approx((D - dt.datetime(1970, 1, 1, tzinfo=UTC)).days)  # from 07-01 00:00
    assert "1 readings reported late" in at_day_4.late_note
