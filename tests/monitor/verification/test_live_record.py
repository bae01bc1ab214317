"""The live record: the service scores each run as its observations arrive, exactly as a hindcast does."""

from __future__ import annotations

import datetime as dt
import sqlite3
from contextlib import closing

import numpy as np
import pandas as pd
from sqlalchemy import func, select

from monitor.app.service import Service
from monitor.store import schema
from monitor.store.db import open_store
from monitor.verification.hindcast import run_hindcast
from monitor.verification.live import record_summary, score_recent, stored_records
from monitor.verification.replay import DiscardTransport, analysis_days

UTC = dt.UTC
FIRST = dt.datetime(2026, 7, 1, 6, 0, tzinfo=UTC)
KEY = ["origin_utc", "basin_id", "quantity", "lead_days", "forecaster"]


def _copy(folder, tmp_path):
    with closing(sqlite3.connect(folder / "brackenfold.sqlite")) as src, \
            closing(sqlite3.connect(tmp_path / "live.sqlite")) as dst:
        src.backup(dst)
    return open_store(f"sqlite:///{tmp_path / 'live.sqlite'}")


def test_the_service_scores_each_run_as_its_observations_arrive_as_a_hindcast_does(brackenfold, tmp_path):
    config, _, folder = brackenfold
    engine = _copy(folder, tmp_path)
    days = analysis_days(FIRST, FIRST + dt.timedelta(days=11))
    service = Service(config, engine=engine, transport=DiscardTransport(), clock=lambda: days[0], replay=True)
    for day in days:
        service.clock = lambda day=day: day
        service.run_cycles(day, season_start=days[0] - dt.timedelta(days=1))
    live = stored_records(engine, "brackenfold")
    assert len(live) > 0
    assert (live.valid_utc <= days[-1]).all()  # nothing scored before its day had ended
    assert set(live.forecaster) >= {"bloomline", "persistence", "persistence_ensemble", "statistical"}

    # scoring again changes nothing
    wb = config.water_body("brackenfold")
    score_recent(engine, config, wb, days[-1])
    again = stored_records(engine, "brackenfold")
    pd.testing.assert_frame_equal(live.sort_values(KEY, ignore_index=True), again.sort_values(KEY, ignore_index=True))

    # the hindcast of the same days replays the same runs and scores them the same way
    hindcast = run_hindcast(config, engine, days).records
    hindcast = hindcast[hindcast.valid_utc <= days[-1]]
    merged = live.merge(hindcast, on=KEY, suffixes=("_live", "_hindcast"))
    assert len(merged) == len(live) == len(hindcast)
    for column in ("observed", "crps", "median", "q05", "q95", "p_level_1"):
        a, b = merged[f"{column}_live"].to_numpy(float), merged[f"{column}_hindcast"].to_numpy(float)
        assert np.allclose(a, b, rtol=1e-12, equal_nan=True), column

    table = record_summary(engine, wb)["skill_by_lead"]
    assert set(table.reference) >= {"persistence", "persistence_ensemble"}
    with engine.connect() as conn:
        assert conn.execute(select(func.count()).select_from(schema.forecast_scores)).scalar() == len(live)
    engine.dispose()
