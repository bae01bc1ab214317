"""Concurrent pushes to one station on PostgreSQL get the QC flags of one sequential ingest.

Threads push interleaved batches of one buoy's series at the same time, so
neighbouring batches are stored in concurrent transactions; spikes sit at
the batches' edges, where the spike, rate-of-change and flat-line tests need
the readings of the neighbouring batch. Every reading's flag and test digits
must equal those of the same readings ingested as one batch.
"""

from __future__ import annotations

import threading
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest

from monitor.ingest.batches import ingest_bytes
from monitor.store.readings import readings_frame
from tests.monitor.conftest import NOW, buoy_csv, fernwater, quarter_hours

pytestmark = pytest.mark.postgres

THREADS = 6
CHUNK = 10  # readings per batch
ROUNDS = 8


def series(n: int) -> list[tuple]:
    """A buoy's (local time, chl, pc, temp) rows: smooth, with spikes and a flat stretch at batch edges."""
    rng = np.random.default_rng(11)
    chl = 6.0 + 2.0 * np.sin(np.arange(n) / 40.0) + rng.normal(0.0, 0.2, n)
    chl[CHUNK - 1::3 * CHUNK] += 30.0  # the last reading of every third batch
    chl[2 * CHUNK::5 * CHUNK] -= 12.0  # the first reading of every fifth batch
    pc = 1.0 + 0.005 * np.arange(n)
    pc[3 * CHUNK - 20:3 * CHUNK + 40] = 1.5  # flat for 15 h across two batch edges
    temp = 18.0 + 0.002 * np.arange(n)
    return [(t, round(float(a), 3), round(float(b), 3), round(float(c), 3))
            for t, a, b, c in zip(quarter_hours("2026-07-01 00:00", n), chl, pc, temp)]


def stored_flags(engine):
    frame = readings_frame(engine, max_flag=9).sort_values(["variable", "time_utc"]).reset_index(drop=True)
    return frame[["variable", "time_utc", "value", "qc_flag"]]


def test_concurrent_batches_of_one_station_get_the_flags_of_one_sequential_ingest(tmp_path, pg_engine,
                                                                                  sqlite_engine):
    config = fernwater(tmp_path)
    feed = config.feed("buoys")
    rows = series(THREADS * CHUNK * ROUNDS)
    chunks = [rows[k:k + CHUNK] for k in range(0, len(rows), CHUNK)]
    # the reference: every reading in one batch, nothing concurrent
    one = ingest_bytes(sqlite_engine, config, feed, buoy_csv(rows), "drop/FW-1/all.csv", now=NOW)
    assert one.rejected == 0 and one.accepted == 3 * len(rows)

    barrier = threading.Barrier(THREADS)

    def push(thread: int) -> list:
        results = []
        for r in range(ROUNDS):
            barrier.wait()  # each round, THREADS neighbouring batches start together
            k = r * THREADS + thread
            results.append(ingest_bytes(pg_engine, config, feed, buoy_csv(chunks[k]), f"drop/FW-1/c{k}.csv",
                                        now=NOW))
        return results

    with ThreadPoolExecutor(THREADS) as pool:
        results = [r for rs in pool.map(push, range(THREADS)) for r in rs]
    assert all(r.status == "ok" for r in results), [r.message for r in results if r.status != "ok"]
    assert sum(r.accepted for r in results) == 3 * len(rows)

    want = stored_flags(sqlite_engine)
    got = stored_flags(pg_engine)
    assert (want.qc_flag.isin([3, 4])).sum() >= 20  # the edges matter: spikes and the flat stretch are flagged
    assert len(got) == len(want)
    differ = (got.qc_flag.to_numpy() != want.qc_flag.to_numpy())
    assert not differ.any(), want[differ].assign(concurrent=got.qc_flag[differ]).to_string()
    np.testing.assert_allclose(got.value.to_numpy(), want.value.to_numpy())
    with pg_engine.connect() as conn, sqlite_engine.connect() as ref:
        q = "SELECT variable, time_utc, qc_tests FROM readings ORDER BY variable, time_utc"
        got_tests = [r[2] for r in conn.exec_driver_sql(q)]
        want_tests = [r[2] for r in ref.exec_driver_sql(q)]
    assert got_tests == want_tests
