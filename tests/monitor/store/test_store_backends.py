"""The store functions on SQLite and on the local PostgreSQL server alike."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest

from monitor.ingest.batches import ingest_bytes
from monitor.store.readings import (
    batches_frame,
    ingest_summary,
    latest_driver_forecast,
    readings_frame,
    rejected_rows_frame,
)
from tests.monitor.conftest import NOW, UTC, buoy_csv, fernwater, quarter_hours

pytestmark = pytest.mark.postgres


def rows(start, n, chl0=5.0):
    return [(t, round(chl0 + 0.01 * i, 3), round(1.0 + 0.005 * i, 3), 18.0 + 0.002 * i)
            for i, t in enumerate(quarter_hours(start, n))]


def test_ingest_and_reingest_on_both_backends(tmp_path, engine):
    config = fernwater(tmp_path)
    feed = config.feed("buoys")
    data = rows("2026-07-01 02:00", 10)
    data[4] = (data[4][0], 40.0, data[4][2], data[4][3])  # a spike: 35 above its neighbours
    data[7] = (data[7][0], None, data[7][2], data[7][3])  # a missing value
    payload = buoy_csv(data) + b"2026-07-01 09:00,x,1,1\n"
    r1 = ingest_bytes(engine, config, feed, payload, "drop/FW-1/a.csv", now=NOW)
    assert (r1.received, r1.accepted, r1.rejected, r1.duplicate) == (33, 32, 1, 0)
    assert r1.flagged >= 3  # the spike and its two neighbours
    before = readings_frame(engine, max_flag=9)
    r2 = ingest_bytes(engine, config, feed, payload, "drop/FW-1/a.csv", now=NOW)
    assert (r2.accepted, r2.duplicate, r2.rejected) == (0, 32, 1)
    after = readings_frame(engine, max_flag=9)
    pd.testing.assert_frame_equal(before, after)
    assert str(after["time_utc"].dtype) == "datetime64[ns, UTC]"
    # 02:00 in Etc/GMT-2 is 00:00 UTC
    assert after["time_utc"].min() == pd.Timestamp("2026-07-01 00:00", tz="UTC")
    chl = after[after["variable"] == "chlorophyll_fluorescence"].reset_index(drop=True)
    assert chl["qc_flag"].tolist()[3:6] == [3, 4, 3]
    assert chl["qc_flag"].iloc[7] == 9 and np.isnan(chl["value"].iloc[7])
    passed = readings_frame(engine, stations=["FW-1"], variables=["chlorophyll_fluorescence"],
                            start=dt.datetime(2026, 7, 1, 0, 15, tzinfo=UTC),
                            end=dt.datetime(2026, 7, 1, 2, 0, tzinfo=UTC))
    assert set(passed["qc_flag"]) == {1}
    assert passed["time_utc"].min() >= pd.Timestamp("2026-07-01 00:15", tz="UTC")
    assert passed["time_utc"].max() <= pd.Timestamp("2026-07-01 02:00", tz="UTC")
    assert passed["time_utc"].is_monotonic_increasing
    rej = rejected_rows_frame(engine)
    assert rej["line"].tolist() == [12, 12] and rej["batch_id"].tolist() == [r1.batch_id, r2.batch_id]
    summary = ingest_summary(engine)
    assert (summary["batches"], summary["accepted"], summary["duplicate"], summary["rejected"]) == (2, 32, 32, 2)
    assert batches_frame(engine)["id"].tolist() == [r2.batch_id, r1.batch_id]


def test_neighbour_flags_update_across_batches_on_both_backends(tmp_path, engine):
    config = fernwater(tmp_path)
    feed = config.feed("buoys")
    data = rows("2026-07-01 00:00", 8)
    data[4] = (data[4][0], 50.0, data[4][2], data[4][3])
    ingest_bytes(engine, config, feed, buoy_csv(data[:4]), "drop/FW-1/a.csv", now=NOW)
    last = readings_frame(engine, variables=["chlorophyll_fluorescence"], max_flag=9)["qc_flag"].iloc[-1]
    assert last == 1  # not a spike candidate yet: gross range passes, spike not evaluated
    ingest_bytes(engine, config, feed, buoy_csv(data[4:]), "drop/FW-1/b.csv", now=NOW)
    chl = readings_frame(engine, variables=["chlorophyll_fluorescence"], max_flag=9)
    assert chl["qc_flag"].tolist()[2:7] == [1, 3, 4, 3, 1]


def test_missing_reading_filled_in_on_both_backends(tmp_path, engine):
    config = fernwater(tmp_path)
    feed = config.feed("buoys")
    data = rows("2026-07-01 00:00", 5)
    gap = [(t, None, None, None) if i == 2 else (t, c, p, w) for i, (t, c, p, w) in enumerate(data)]
    ingest_bytes(engine, config, feed, buoy_csv(gap), "drop/FW-1/a.csv", now=NOW)
    assert (readings_frame(engine, max_flag=9)["qc_flag"] == 9).sum() == 3
    r = ingest_bytes(engine, config, feed, buoy_csv([data[2]]), "drop/FW-1/b.csv", now=NOW)
    assert r.accepted == 3
    assert (readings_frame(engine, max_flag=9)["qc_flag"] == 9).sum() == 0


def test_weather_forecasts_latest_issue_on_both_backends(tmp_path, engine):
    config = fernwater(tmp_path)
    feed = config.feed("forecasts")
    payload = (b"issued_utc,valid_utc,air_temp_c,wind_ms\n"
               b"2026-07-01T00:00:00Z,2026-07-01T01:00:00Z,14.0,3.0\n"
               b"2026-07-01T00:00:00Z,2026-07-01T02:00:00Z,15.0,3.5\n"
               b"2026-07-02T00:00:00Z,2026-07-02T01:00:00Z,16.0,2.0\n"
               b"2026-07-02T00:00:00Z,2026-07-02T02:00:00Z,,2.5\n"
               b"2026-07-02T00:00:00Z,2026-07-02T03:00:00Z,99.0,2.5\n")
    r = ingest_bytes(engine, config, feed, payload, "fc/2026-07.csv", now=NOW)
    assert (r.accepted, r.rejected) == (8, 2)  # a missing value and 99 °C (above the sensor span) rejected
    r2 = ingest_bytes(engine, config, feed, payload, "fc/2026-07.csv", now=NOW)
    assert (r2.accepted, r2.duplicate) == (0, 8)
    fc = latest_driver_forecast(engine, "FW-MET", issued_at_or_before=dt.datetime(2026, 7, 1, 12, tzinfo=UTC))
    assert set(fc["issued_utc"]) == {pd.Timestamp("2026-07-01", tz="UTC")}
    assert fc[fc["variable"] == "air_temperature"]["value"].tolist() == [14.0, 15.0]
    fc2 = latest_driver_forecast(engine, "FW-MET", issued_at_or_before=dt.datetime(2026, 7, 3, tzinfo=UTC))
    assert fc2[fc2["variable"] == "wind_speed"]["value"].tolist() == [2.0, 2.5, 2.5]
    assert latest_driver_forecast(engine, "FW-MET",
                                  issued_at_or_before=dt.datetime(2026, 6, 1, tzinfo=UTC)).empty


def test_readings_frame_refuses_naive_times(tmp_path, engine):
    with pytest.raises(ValueError, match="start must be an aware datetime"):
        readings_frame(engine, start=dt.datetime(2026, 7, 1))


def test_hostile_text_is_stored_verbatim_as_data(tmp_path, engine):
    config = fernwater(tmp_path)
    feed = config.feed("lab")
    payload = (b"sampled_at,site,variable,value,unit\n"
               b"2026-07-01 10:00,FW-LAB'); DROP TABLE readings;--,nitrate,1,mg/L\n"
               b"2026-07-01 10:00,FW-LAB,nitrate,1\x00,mg/L\n")
    r = ingest_bytes(engine, config, feed, payload, "lab/x.csv", now=NOW)
    assert r.rejected == 2
    raw = rejected_rows_frame(engine)["raw"].tolist()
    assert "DROP TABLE readings" in raw[0] and "\\x00" in raw[1]
    assert readings_frame(engine, max_flag=9).empty  # and the table is still there


# fernwater's time zone Etc/GMT-2 (UTC+2): the whole day 2026-07-01 ends at 2026-07-02 00:00 local = 22:00 UTC,
# the very time of an instant reading at local midnight
WHOLE_DAY = b"2026-07-01,FW-LAB,chlorophyll_a,12,ug/L\n"
MIDNIGHT = b"2026-07-02T00:00,FW-LAB,chlorophyll_a,11,ug/L\n"
LAB_HEADER = b"sampled_at,site,variable,value,unit\n"


def test_a_whole_day_value_and_an_instant_reading_at_local_midnight_are_two_readings_on_both_backends(tmp_path,
                                                                                                     engine):
    import dataclasses

    config = fernwater(tmp_path)
    feed = dataclasses.replace(config.feed("lab"), time_format="iso")
    r1 = ingest_bytes(engine, config, feed, LAB_HEADER + WHOLE_DAY + MIDNIGHT, "lab/a.csv", now=NOW)
    assert (r1.accepted, r1.duplicate, r1.rejected) == (2, 0, 0)  # one batch: no repeat, no conflict
    r2 = ingest_bytes(engine, config, feed, LAB_HEADER + MIDNIGHT + WHOLE_DAY, "lab/b.csv", now=NOW)
    assert (r2.accepted, r2.duplicate, r2.rejected) == (0, 2, 0)  # each matches its own stored reading
    r3 = ingest_bytes(engine, config, feed, LAB_HEADER + b"2026-07-01,FW-LAB,chlorophyll_a,13,ug/L\n", "lab/c.csv",
                      now=NOW)
    assert r3.rejected == 1
    assert "stored 12.0, received 13.0" in rejected_rows_frame(engine).reason.iloc[-1]  # the whole-day one
    stored = readings_frame(engine, variables=["chlorophyll_a"], max_flag=9)
    assert stored.time_utc.tolist() == [pd.Timestamp("2026-07-01 22:00", tz="UTC")] * 2
    assert sorted(zip(stored.whole_day, stored.value)) == [(False, 11.0), (True, 12.0)]


def test_the_whole_day_key_migration_keeps_the_stored_readings_on_both_backends(tmp_path, engine):
    """0007_whole_day_key on a store at 0006_realdata holding a whole-day value: kept, and an instant
    reading at the same time can then join it; down again while only one of them is stored."""
    import dataclasses

    from alembic import command

    from monitor.store.db import alembic_config, upgrade

    def to(revision, down=False):
        cfg = alembic_config(engine)
        with engine.begin() as conn:
            cfg.attributes["connection"] = conn
            (command.downgrade if down else command.upgrade)(cfg, revision)

    config = fernwater(tmp_path)
    feed = dataclasses.replace(config.feed("lab"), time_format="iso")
    assert ingest_bytes(engine, config, feed, LAB_HEADER + WHOLE_DAY, "lab/a.csv", now=NOW).accepted == 1
    to("0006_realdata", down=True)
    upgrade(engine)
    assert ingest_bytes(engine, config, feed, LAB_HEADER + MIDNIGHT, "lab/b.csv", now=NOW).accepted == 1
    stored = readings_frame(engine, variables=["chlorophyll_a"], max_flag=9)
    assert sorted(zip(stored.whole_day, stored.value)) == [(False, 11.0), (True, 12.0)]
