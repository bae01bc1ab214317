"""Censored readings, stored-only variables and fill values in the store, on SQLite and PostgreSQL.

A value below detection is stored with no number (value NULL, QC flag 9),
``censored = 1`` and its detection limit; plain queries never see it as a
number; ingesting it again is a duplicate, another limit a conflict.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from monitor.ingest.batches import ingest_bytes
from monitor.store.readings import readings_frame, rejected_rows_frame
from tests.monitor.conftest import NOW, buoy_csv, fernwater, quarter_hours

pytestmark = pytest.mark.postgres
HEADER = "sampled_at,site,variable,value,unit\n"


def lab_csv(*rows: str) -> bytes:
    return (HEADER + "".join(f"{r}\n" for r in rows)).encode()


def rows_of(engine, variable=None):
    sql = "SELECT variable, value, censored, detection_limit, unit, qc_flag, qc_tests FROM readings"
    with engine.connect() as conn:
        got = conn.exec_driver_sql(sql + " ORDER BY variable, time_utc").fetchall()
    return [tuple(r) for r in got if variable is None or r[0] == variable]


def test_a_censored_value_is_stored_with_its_limit_and_no_number(tmp_path, engine):
    config = fernwater(tmp_path)
    payload = lab_csv("2026-07-01 10:00,FW-LAB,microcystin,<0.1,ug/L", "2026-07-08 10:00,FW-LAB,microcystin,0.4,ug/L",
                      "2026-07-01 10:00,FW-LAB,srp,<0.004,mg/L P", "2026-07-01 10:00,FW-LAB,srp,<0.004,mg/L P")
    r = ingest_bytes(engine, config, config.feed("lab"), payload, "lab/a.csv", now=NOW)
    assert (r.accepted, r.duplicate, r.rejected) == (3, 1, 0)
    # gross range of the limit in the first digit (0.1 µg/L inside microcystin's span: 1), no other test (9)
    assert rows_of(engine, "microcystin") == [("microcystin", None, 1, 0.1, None, 9, "199999"),
                                               ("microcystin", 0.4, 0, None, None, 1, "122222")]
    (srp,) = rows_of(engine, "srp")
    assert srp[1] is None and srp[2] == 1 and srp[3] == pytest.approx(4.0) and srp[5] == 9
    plain = readings_frame(engine, max_flag=9)
    assert plain["value"].tolist() == [0.4]  # censored readings are not plain values, whatever max_flag
    with_limits = readings_frame(engine, max_flag=1, include_censored=True)
    assert with_limits["censored"].tolist() == [True, True, False]
    np.testing.assert_allclose(with_limits["detection_limit"], [0.1, 4.0, np.nan])
    assert with_limits["value"].isna().tolist() == [True, True, False]


def test_reingesting_censored_values_counts_duplicates_and_a_changed_limit_is_a_conflict(tmp_path, engine):
    config = fernwater(tmp_path)
    feed = config.feed("lab")
    first = lab_csv("2026-07-01 10:00,FW-LAB,microcystin,<0.1,ug/L", "2026-07-01 10:00,FW-LAB,nitrate,,mg/L")
    ingest_bytes(engine, config, feed, first, "lab/a.csv", now=NOW)
    again = ingest_bytes(engine, config, feed, first, "lab/a.csv", now=NOW)
    assert (again.accepted, again.duplicate, again.rejected) == (0, 2, 0)
    changed = lab_csv("2026-07-01 10:00,FW-LAB,microcystin,<0.2,ug/L", "2026-07-01 10:00,FW-LAB,microcystin,0.1,ug/L")
    r = ingest_bytes(engine, config, feed, changed, "lab/b.csv", now=NOW)
    assert (r.accepted, r.rejected) == (0, 2)
    assert rejected_rows_frame(engine, r.batch_id)["reason"].tolist() == [
        "microcystin at FW-LAB conflicts with the stored reading (stored <0.1, received <0.2)",
        "microcystin at the same time as line 2 with another value (0.1 vs <0.2)"]
    # a stored missing reading is filled in by a later censored one
    fill = ingest_bytes(engine, config, feed, lab_csv("2026-07-01 10:00,FW-LAB,nitrate,<5,ug/L N"), "lab/c.csv",
                        now=NOW)
    assert (fill.accepted, fill.rejected) == (1, 0)
    assert rows_of(engine, "nitrate") == [("nitrate", None, 1, 5.0, None, 9, "199999")]


def test_a_censored_reading_is_no_neighbour_in_the_spike_test(tmp_path, engine):
    config = fernwater(tmp_path)
    feed = dataclasses.replace(config.feed("buoys"))
    times = quarter_hours("2026-07-01 00:00", 5)
    # phycocyanin 60, 60, <0.5, 60, 60: were the limit a value, the readings either side would be suspect
    # (spike and rate of change against 0.5); as it is no number, they are compared with each other
    payload = buoy_csv([(t, 5.0 + 0.01 * i, pc, 18.0)
                        for i, (t, pc) in enumerate(zip(times, [60, 60, "<0.5", 60, 60]))])
    r = ingest_bytes(engine, config, feed, payload, "drop/FW-1/a.csv", now=NOW)
    assert r.rejected == 0
    pc = rows_of(engine, "phycocyanin")
    assert [x[2] for x in pc] == [0, 0, 1, 0, 0]
    assert [x[5] for x in pc] == [1, 1, 9, 1, 1]
    # the spike test skips it as it skips a missing reading: the readings either side are each other's neighbours
    assert [x[6][2] for x in pc] == ["2", "1", "9", "1", "2"]


def test_a_stored_only_variable_keeps_its_unit_and_is_checked_only_as_configured(tmp_path, engine):
    config = fernwater(tmp_path)
    buoy = dataclasses.replace(config.station("FW-1"), stored_only=("chlorophyll_raw_volts",))
    config = dataclasses.replace(config, stations=(buoy, *(s for s in config.stations if s.id != "FW-1")))
    payload = lab_csv("2026-07-01 10:00,FW-1,chlorophyll_raw_volts,0.73,V",
                      "2026-07-01 10:15,FW-1,chlorophyll_raw_volts,7.3,V")
    ingest_bytes(engine, config, config.feed("lab"), payload, "lab/a.csv", now=NOW)
    assert [(v, u, f) for _, v, _, _, u, f, _ in rows_of(engine)] == [(0.73, "V", 2), (7.3, "V", 2)]
    # a sensor span configured for the station's own variable: gross range on
    buoy = dataclasses.replace(buoy, qc={"chlorophyll_raw_volts": {"sensor_min": 0.0, "sensor_max": 5.0}})
    config = dataclasses.replace(config, stations=(buoy, *(s for s in config.stations if s.id != "FW-1")))
    ingest_bytes(engine, config, config.feed("lab"), lab_csv("2026-07-01 10:30,FW-1,chlorophyll_raw_volts,9.1,V"),
                 "lab/b.csv", now=NOW)
    assert rows_of(engine)[-1][5] == 4


def test_fill_values_and_overflow_are_rejected_and_reingest_counts_no_conflicts(tmp_path, engine):
    config = fernwater(tmp_path)
    payload = lab_csv("2026-07-01 10:00,FW-LAB,nitrate,-9999,ug/L", "2026-07-01 10:00,FW-LAB,srp,1e308,mg/L",
                      "2026-07-01 10:00,FW-LAB,total_phosphorus,1e28,mg/L", "2026-07-01 10:00,FW-LAB,chlorophyll_a,inf,ug/L",
                      "2026-07-01 10:00,FW-LAB,microcystin,0.3,ug/L")
    results = [ingest_bytes(engine, config, config.feed("lab"), payload, "lab/a.csv", now=NOW) for _ in range(2)]
    assert [(r.accepted, r.rejected, r.duplicate) for r in results] == [(1, 4, 0), (0, 4, 1)]
    reasons = rejected_rows_frame(engine)["reason"]
    assert not reasons.str.contains("conflict").any()
    values = [row[1] for row in rows_of(engine)]
    assert values == [0.3] and all(math.isfinite(v) for v in values)
