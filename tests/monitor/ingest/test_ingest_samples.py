"""The demo scenario's feeds (sample_feeds/, written by its seeded script) through the real config."""

from __future__ import annotations

import shutil
from pathlib import Path

import pandas as pd
import pytest

from monitor.config import load_config
from monitor.ingest.feeds.csv_folder import feed_files, ingest_all, ingest_path
from monitor.store.db import open_store
from monitor.store.readings import readings_frame, rejected_rows_frame

SAMPLES = Path(__file__).resolve().parents[3] / "sample_feeds"

pytestmark = pytest.mark.slow


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """The demo config beside a copy of the feeds, the way ``bloomline demo`` lays them out."""
    work = tmp_path_factory.mktemp("demo")
    for folder in ("buoys", "lab", "inflows", "weather"):
        shutil.copytree(SAMPLES / folder, work / "feeds" / folder)
    shutil.copyfile(SAMPLES / "bloomline.toml", work / "bloomline.toml")
    config = load_config(work / "bloomline.toml")
    engine = open_store(config.service.database_url)
    results = ingest_all(engine, config)
    yield config, engine, results
    engine.dispose()


def test_every_sample_feed_loads_with_only_the_documented_rejections(demo):
    config, engine, results = demo
    assert all(r.status in ("ok", "partial") for r in results), [r.message for r in results if r.status != "ok"]
    partial = [r for r in results if r.status == "partial"]
    assert [Path(r.origin).relative_to(Path(r.origin).parents[2]).as_posix() for r in partial] == \
        ["buoys/CR-DB/2026-07.csv"]
    rej = rejected_rows_frame(engine)
    # sample_feeds/README.md lists the damaged block of that file, rows from 2026-07-14 08:00
    times = sorted({raw.split(",")[0] for raw in rej["raw"]})
    assert times == ["", "14/07/2026 10:15", "2026-07-14 08:15", "2026-07-14 08:45", "2026-07-14 09:00",
                     "2026-07-14 09:30", "2026-07-14 10:45", "2026-07-14 11:15", "2026-07-14 24:45", "timestamp"]
    # exact duplicate rows (README: 4 rows at CR-FA, 2 at CR-MR, 1 at SL-01, three readings each)
    assert sum(r.duplicate for r in results) == (4 + 2 + 1) * 3
    for r in results:
        assert r.received == r.accepted + r.rejected + r.duplicate


def test_reingesting_every_sample_feed_twice_leaves_the_store_unchanged(demo):
    config, engine, _ = demo
    before = readings_frame(engine, max_flag=9)
    fc_before = _forecast_count(engine)
    for _ in range(2):
        for feed in config.feeds:
            for path in feed_files(feed):
                r = ingest_path(engine, config, feed, path)
                assert r.accepted == 0, (path, r.message)
    pd.testing.assert_frame_equal(readings_frame(engine, max_flag=9), before)
    assert _forecast_count(engine) == fc_before


def test_sample_readings_are_in_canonical_units(demo):
    _, engine, _ = demo
    frame = readings_frame(engine, max_flag=1)
    lab_nitrate = frame[(frame["variable"] == "nitrate") & (frame["station_id"] == "CR-FA")]["value"]
    assert lab_nitrate.median() > 20  # the lab sends mg/L as N; stored in µg/L
    sl_pc = frame[(frame["variable"] == "phycocyanin") & (frame["station_id"] == "SL-01")]["value"]
    assert 0 < sl_pc.median() < 3  # RFU through the station's calibration; Sorrel Lake stays clear


def _forecast_count(engine) -> int:
    from sqlalchemy import func, select

    from monitor.store.schema import driver_forecasts

    with engine.connect() as conn:
        return conn.execute(select(func.count()).select_from(driver_forecasts)).scalar()


def test_qc_finds_the_documented_spikes_and_the_fouling_drift(demo):
    from monitor.ingest import qc

    _, engine, _ = demo
    frame = readings_frame(engine, max_flag=9)
    # truth/events.csv lists every spike written into the buoy files (local times, UTC+2)
    events = pd.read_csv(SAMPLES / "truth" / "events.csv")
    spikes = events[events["kind"] == "spike"].copy()
    spikes["variable"] = spikes["detail"].map({"chl_fluor": "chlorophyll_fluorescence", "pc": "phycocyanin",
                                               "temp": "water_temperature"})
    spikes["time_utc"] = (pd.to_datetime(spikes["start_local"]) - pd.Timedelta(hours=2)).dt.tz_localize("UTC")
    hit = spikes.merge(frame, left_on=["site", "variable", "time_utc"],
                       right_on=["station_id", "variable", "time_utc"])
    caught = (hit["qc_flag"] >= 3).groupby(hit["variable"]).mean()
    assert (caught > 0.85).all(), caught.to_dict()  # the misses are drops to near zero in clear water
    # README: CR-MR's chl fluorometer fouls from 2026-09-03 until it is cleaned on 2026-09-24
    from sqlalchemy import select

    from monitor.store.schema import readings

    with engine.connect() as conn:
        rows = conn.execute(select(readings.c.station_id, readings.c.time_utc, readings.c.qc_tests)
                            .where(readings.c.variable == "chlorophyll_fluorescence")).fetchall()
    drift = [(s, t) for s, t, tests in rows if tests[qc.TESTS.index("drift")] == "3"]
    assert drift and {s for s, _ in drift} == {"CR-MR"}
    assert min(t for _, t in drift).date() >= pd.Timestamp("2026-09-03").date()
    assert max(t for _, t in drift).date() <= pd.Timestamp("2026-10-01").date()
