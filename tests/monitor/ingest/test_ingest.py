"""Ingest batches on SQLite: nothing lost, idempotent, atomic, QC across file boundaries."""

from __future__ import annotations

import dataclasses
import hashlib
import os
import signal
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
from sqlalchemy import func, select

from monitor.ingest import qc_storage as ingest_mod
from monitor.ingest.batches import ingest_bytes
from monitor.ingest.feeds.csv_folder import ingest_all, ingest_feed, ingest_path
from monitor.store.readings import ingest_summary, readings_frame, rejected_rows_frame
from monitor.store.schema import ingest_batches, readings
from tests.monitor.conftest import NOW, buoy_csv, fernwater, quarter_hours

ROOT = Path(__file__).resolve().parents[3]


def write(path: Path, data: bytes) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(data)
    return path


def smooth_rows(start: str, n: int, chl0: float = 5.0):
    times = quarter_hours(start, n)
    return [(t, round(chl0 + 0.01 * i, 3), round(1.0 + 0.005 * i, 3), round(18 + 0.002 * i, 3))
            for i, t in enumerate(times)]


def stored(engine):
    return readings_frame(engine, max_flag=9).sort_values(["station_id", "variable", "time_utc"]).reset_index(drop=True)


def count(engine, table) -> int:
    with engine.connect() as conn:
        return conn.execute(select(func.count()).select_from(table)).scalar()


def test_counts_add_up_and_rejected_rows_are_kept_with_line_raw_and_reason(tmp_path, sqlite_engine):
    config = fernwater(tmp_path)
    rows = smooth_rows("2026-07-01 00:00", 8)
    payload = buoy_csv(rows) + b"2026-07-01 02:00,1,2\nnot-a-time,1,1,1\n" + buoy_csv([rows[0]], header="")[1:]
    r = ingest_bytes(sqlite_engine, config, config.feed("buoys"), payload, "drop/FW-1/2026-07.csv", now=NOW)
    assert r.status == "partial"
    assert (r.received, r.accepted, r.rejected, r.duplicate) == (8 * 3 + 2 + 3, 24, 2, 3)
    rej = rejected_rows_frame(sqlite_engine, r.batch_id)
    assert rej["line"].tolist() == [10, 11]
    assert rej["raw"].tolist() == ["2026-07-01 02:00,1,2", "not-a-time,1,1,1"]
    assert rej["reason"].iloc[0] == "expected 4 fields, got 3"
    summary = ingest_summary(sqlite_engine)
    assert summary["received"] == r.received and summary["rejected"] == 2
    assert len(summary["top_reasons"]) == 2


def test_raw_payload_is_archived_under_its_sha256(tmp_path, sqlite_engine):
    config = fernwater(tmp_path)
    payload = buoy_csv(smooth_rows("2026-07-01 00:00", 4))
    r = ingest_bytes(sqlite_engine, config, config.feed("buoys"), payload, "drop/FW-1/a.csv", now=NOW)
    with sqlite_engine.connect() as conn:
        sha, archive = conn.execute(select(ingest_batches.c.sha256, ingest_batches.c.archive_path)
                                    .where(ingest_batches.c.id == r.batch_id)).one()
    assert sha == hashlib.sha256(payload).hexdigest()
    assert Path(archive).read_bytes() == payload
    assert Path(archive).name == f"{sha}.csv"


def test_reingesting_a_feed_changes_nothing(tmp_path, sqlite_engine):
    config = fernwater(tmp_path)
    drop = tmp_path / "drop"
    write(drop / "FW-1" / "2026-07.csv", buoy_csv(smooth_rows("2026-07-31 20:00", 16)))
    write(drop / "FW-1" / "2026-08.csv", buoy_csv(smooth_rows("2026-08-01 00:00", 16, chl0=5.16)))
    write(tmp_path / "lab" / "samples.csv", b"sampled_at,site,variable,value,unit\n"
          b"2026-08-01 01:00,FW-LAB,chlorophyll_a,5.0,ug/L\n2026-08-01 01:00,FW-LAB,microcystin,<0.1,ug/L\n")
    write(tmp_path / "fc" / "2026-08.csv", b"issued_utc,valid_utc,air_temp_c,wind_ms\n"
          b"2026-08-01T00:00:00Z,2026-08-01T01:00:00Z,20.1,2.0\n")
    first = ingest_all(sqlite_engine, config, now=NOW)
    assert [r.status for r in first] == ["ok"] * 4
    before = stored(sqlite_engine)
    n_batches = count(sqlite_engine, ingest_batches)
    assert ingest_all(sqlite_engine, config, now=NOW) == []  # no new files
    assert count(sqlite_engine, ingest_batches) == n_batches
    # loading the same files again by hand: all duplicates, store unchanged
    again = [ingest_path(sqlite_engine, config, config.feed("buoys"), p, now=NOW)
             for p in sorted((drop / "FW-1").glob("*.csv"))]
    assert all(r.accepted == 0 and r.duplicate == r.received for r in again)
    assert stored(sqlite_engine).equals(before)


def test_duplicates_inside_a_file_and_conflicting_values(tmp_path, sqlite_engine):
    config = fernwater(tmp_path)
    rows = smooth_rows("2026-07-01 00:00", 4)
    conflicting = (rows[1][0], 99.0, rows[1][2], rows[1][3])
    payload = buoy_csv(rows + [rows[2], conflicting])
    r = ingest_bytes(sqlite_engine, config, config.feed("buoys"), payload, "drop/FW-1/a.csv", now=NOW)
    assert r.duplicate == 3 + 2  # the repeated row (3 readings) and the equal pc and temp of the conflicting row
    assert r.rejected == 1 and "another value" in rejected_rows_frame(sqlite_engine)["reason"].iloc[0]
    # a later batch with another value for a stored reading is rejected, not stored over it
    r2 = ingest_bytes(sqlite_engine, config, config.feed("buoys"), buoy_csv([conflicting]), "drop/FW-1/b.csv",
                      now=NOW)
    assert (r2.accepted, r2.rejected, r2.duplicate) == (0, 1, 2)
    assert "conflicts with the stored reading" in rejected_rows_frame(sqlite_engine, r2.batch_id)["reason"].iloc[0]
    chl = stored(sqlite_engine).query("variable == 'chlorophyll_fluorescence'")["value"].tolist()
    assert 99.0 not in chl


def test_a_missing_reading_is_stored_with_flag_9_and_filled_in_later(tmp_path, sqlite_engine):
    config = fernwater(tmp_path)
    rows = smooth_rows("2026-07-01 00:00", 6)
    gap = [(t, None if i == 3 else c, p, w) for i, (t, c, p, w) in enumerate(rows)]
    ingest_bytes(sqlite_engine, config, config.feed("buoys"), buoy_csv(gap), "drop/FW-1/a.csv", now=NOW)
    chl = stored(sqlite_engine).query("variable == 'chlorophyll_fluorescence'")
    assert chl["qc_flag"].iloc[3] == 9 and np.isnan(chl["value"].iloc[3])
    assert 3 not in readings_frame(sqlite_engine, max_flag=4)["qc_flag"].tolist()
    r = ingest_bytes(sqlite_engine, config, config.feed("buoys"), buoy_csv([rows[3]]), "drop/FW-1/b.csv", now=NOW)
    assert r.accepted == 1 and r.duplicate == 2
    chl = stored(sqlite_engine).query("variable == 'chlorophyll_fluorescence'")
    assert chl["value"].iloc[3] == rows[3][1] and chl["qc_flag"].iloc[3] == 1


def test_spike_across_a_file_boundary_is_flagged_whatever_the_order(tmp_path):
    """QARTOD spike (DO manual 2018, test 8) needs both neighbours; the first point of a file
    takes its earlier neighbour from the store, and the stored last point of the previous file
    is re-evaluated once its later neighbour arrives."""
    rows = smooth_rows("2026-07-01 00:00", 12)
    spiked = list(rows)
    t, c, p, w = spiked[6]
    spiked[6] = (t, c + 40.0, p, w)  # 40 µg/L above its neighbours: over spike_fail (25)
    a, b = buoy_csv(spiked[:6]), buoy_csv(spiked[6:])
    results = {}
    for order in ("whole", "ab", "ba"):
        folder = tmp_path / order
        folder.mkdir()
        config = fernwater(folder)
        from monitor.store.db import connect, upgrade

        engine = connect(config.service.database_url)
        upgrade(engine)
        payloads = {"whole": [buoy_csv(spiked)], "ab": [a, b], "ba": [b, a]}[order]
        for k, payload in enumerate(payloads):
            ingest_bytes(engine, config, config.feed("buoys"), payload, f"drop/FW-1/{k}.csv", now=NOW)
        with engine.connect() as conn:
            results[order] = conn.execute(select(readings.c.variable, readings.c.time_utc, readings.c.qc_flag,
                                                 readings.c.qc_tests)
                                          .order_by(readings.c.variable, readings.c.time_utc)).fetchall()
        engine.dispose()
    assert results["ab"] == results["whole"] == results["ba"]
    chl = [row for row in results["whole"] if row[0] == "chlorophyll_fluorescence"]
    assert [row[2] for row in chl[4:9]] == [1, 3, 4, 3, 1]  # neighbours suspect, the spike fails


def test_drift_against_lab_chlorophyll_is_applied_whichever_arrives_first(tmp_path):
    rows = []
    for day in range(1, 9):
        for t in quarter_hours(f"2026-07-{day:02d} 00:00", 96):
            rows.append((t, 10.0 + 0.001 * len(rows) % 0.5, 1.0 + 0.0001 * len(rows), 18 + 0.0001 * len(rows)))
    lab = (b"sampled_at,site,variable,value,unit\n"
           b"2026-07-02 12:00,FW-LAB,chlorophyll_a,9.8,ug/L\n"     # agrees
           b"2026-07-05 12:00,FW-LAB,chlorophyll_a,4.0,ug/L\n"     # the sensor reads 2.5 × the lab value
           b"2026-07-07 12:00,FW-LAB,chlorophyll_a,4.1,ug/L\n")    # and again: drift, not one odd sample
    outcomes = []
    for order in ("buoy-first", "lab-first"):
        folder = tmp_path / order
        folder.mkdir()
        config = fernwater(folder)
        from monitor.store.db import connect, upgrade

        engine = connect(config.service.database_url)
        upgrade(engine)
        steps = [("buoys", buoy_csv(rows)), ("lab", lab)]
        if order == "lab-first":
            steps.reverse()
        for feed, payload in steps:
            ingest_bytes(engine, config, config.feed(feed), payload, f"drop/FW-1/{feed}.csv", now=NOW)
        chl = readings_frame(engine, stations=["FW-1"], variables=["chlorophyll_fluorescence"], max_flag=9)
        outcomes.append(chl[["time_utc", "qc_flag"]].reset_index(drop=True))
        engine.dispose()
    assert outcomes[0].equals(outcomes[1])
    chl = outcomes[0]
    hour = (chl["time_utc"] - chl["time_utc"].iloc[0]).dt.total_seconds() / 3600 + 2  # local hours from Jul 1 00:00
    assert (chl["qc_flag"][(hour > 40) & (hour < 24 * 4 + 11)] == 1).all()
    assert (chl["qc_flag"][hour > 24 * 4 + 13] == 3).all()


def test_ingest_feed_takes_each_new_file_once_and_moves_it_to_the_archive(tmp_path, sqlite_engine):
    base = fernwater(tmp_path)
    feed = dataclasses.replace(base.feed("buoys"), archive=True)
    config = dataclasses.replace(base, feeds=(feed,))
    drop = tmp_path / "drop"
    first = write(drop / "FW-1" / "2026-07.csv", buoy_csv(smooth_rows("2026-07-01 00:00", 4)))
    seen = []
    results = ingest_feed(sqlite_engine, config, feed, progress=lambda i, n, r: seen.append((i, n, r.status)), now=NOW)
    assert [r.status for r in results] == ["ok"] and seen == [(1, 1, "ok")]
    assert not first.exists()
    assert (tmp_path / "archive" / "buoys" / "processed" / "FW-1" / "2026-07.csv").exists()
    # the same bytes dropped again under another name are not loaded twice
    write(drop / "FW-1" / "copy.csv", buoy_csv(smooth_rows("2026-07-01 00:00", 4)))
    write(drop / "FW-1" / "2026-08.csv", buoy_csv(smooth_rows("2026-08-01 00:00", 4)))
    results = ingest_feed(sqlite_engine, config, feed, now=NOW)
    assert [Path(r.origin).name for r in results] == ["2026-08.csv"]
    assert list((drop / "FW-1").iterdir()) == []


def test_a_failed_batch_stores_nothing_is_recorded_and_is_retried(tmp_path, sqlite_engine, monkeypatch):
    config = fernwater(tmp_path)
    write(tmp_path / "drop" / "FW-1" / "2026-07.csv", buoy_csv(smooth_rows("2026-07-01 00:00", 4)))
    original = ingest_mod._insert_readings

    def broken(*args, **kwargs):
        original(*args, **kwargs)
        raise RuntimeError("disk on fire")

    monkeypatch.setattr(ingest_mod, "_insert_readings", broken)
    [r] = ingest_feed(sqlite_engine, config, config.feed("buoys"), now=NOW)
    assert r.status == "failed" and "disk on fire" in r.message
    assert count(sqlite_engine, readings) == 0
    monkeypatch.setattr(ingest_mod, "_insert_readings", original)
    [r] = ingest_feed(sqlite_engine, config, config.feed("buoys"), now=NOW)
    assert r.status == "ok" and r.accepted == 12


def test_killing_the_process_in_the_middle_of_a_batch_leaves_none_of_it(tmp_path):
    config = fernwater(tmp_path)
    write(tmp_path / "drop" / "FW-1" / "2026-07.csv", buoy_csv(smooth_rows("2026-07-01 00:00", 400)))
    script = textwrap.dedent(f"""
        import sys, time
        sys.path.insert(0, {str(ROOT)!r})
        from pathlib import Path
        from monitor.ingest import qc_storage as ingest
        from monitor.ingest.feeds.csv_folder import ingest_feed
        from monitor.store.db import open_store
        from tests.monitor.conftest import fernwater, NOW
        config = fernwater(Path({str(tmp_path)!r}))
        engine = open_store(config.service.database_url)
        original = ingest._insert_readings
        def slow(*args, **kwargs):
            n = original(*args, **kwargs)
            print("inserted", n, flush=True)
            time.sleep(60)
            return n
        ingest._insert_readings = slow
        ingest_feed(engine, config, config.feed("buoys"), now=NOW)
    """)
    with subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.PIPE, text=True, cwd=ROOT) as proc:
        try:
            line = proc.stdout.readline()  # the readings are in, the transaction still open
        finally:
            os.kill(proc.pid, signal.SIGKILL)
            proc.wait(timeout=30)
    assert line.startswith("inserted 1200"), line
    from monitor.store.db import open_store

    engine = open_store(config.service.database_url)
    try:
        assert count(engine, readings) == 0 and count(engine, ingest_batches) == 0
        [r] = ingest_feed(engine, config, config.feed("buoys"), now=NOW)  # the file is still new
        assert r.accepted == 1200 and count(engine, readings) == 1200
    finally:
        engine.dispose()


def test_qc_thresholds_come_from_the_config_and_the_station(tmp_path, sqlite_engine):
    config = fernwater(tmp_path, qc={"phycocyanin": {"user_max": 1.01}},
                       station_qc={"water_temperature": {"user_max": 18.005}})
    ingest_bytes(sqlite_engine, config, config.feed("buoys"), buoy_csv(smooth_rows("2026-07-01 00:00", 6)),
                 "drop/FW-1/a.csv", now=NOW)
    frame = stored(sqlite_engine)
    temp = frame[frame["variable"] == "water_temperature"]
    pc = frame[frame["variable"] == "phycocyanin"]
    # temperatures 18.000 … 18.010 against a station user maximum of 18.005; pc 1.000 … 1.025 against 1.01
    assert temp["qc_flag"].tolist() == [1, 1, 1, 3, 3, 3]
    assert pc["qc_flag"].tolist() == [1, 1, 1, 3, 3, 3]


def test_a_station_seasonal_climatology_reaches_the_stored_flags(tmp_path, sqlite_engine):
    spans = [[0.0, 10.0]] * 12
    spans[6] = [15.0, 30.0]  # July
    config = fernwater(tmp_path, climatology={"water_temperature": spans})
    rows = smooth_rows("2026-06-30 20:00", 4) + smooth_rows("2026-07-01 04:00", 4)  # 18 °C, UTC+2
    ingest_bytes(sqlite_engine, config, config.feed("buoys"), buoy_csv(rows), "drop/FW-1/a.csv", now=NOW)
    with sqlite_engine.connect() as conn:
        got = conn.execute(select(readings.c.time_utc, readings.c.qc_tests)
                           .where(readings.c.variable == "water_temperature").order_by(readings.c.time_utc)).fetchall()
    # the climatology digit (second): outside June's span, inside July's
    assert [(t.month, tests[1]) for t, tests in got] == [(6, "3")] * 4 + [(7, "1")] * 4
