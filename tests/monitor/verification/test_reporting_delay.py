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


def test_the_availability_rule_is_the_same_in_sql_and_on_a_frame(tmp_path, sqlite_engine):
    """``Availability`` in a query (``readings_frame(available=)``) keeps exactly the rows its frame filter keeps:
    a delayed station's reading from its time + delay, the others' from their time."""
    from monitor.store.availability import Availability
    from monitor.store.readings import readings_frame

    config = delayed_config(tmp_path)
    payload = (b"sampled_at,site,variable,value,unit\n"
               b"2026-07-01 12:00,FW-LAB,chlorophyll_a,12,ug/L\n"
               b"2026-07-02 12:00,FW-LAB,chlorophyll_a,13,ug/L\n")
    assert ingest_bytes(sqlite_engine, config, config.feed("lab"), payload, "lab/a.csv", now=NOW).accepted == 2
    every = readings_frame(sqlite_engine, variables=["chlorophyll_a"])
    for days in (1, 3, 4, 5):
        at = dt.datetime(2026, 7, 1, 10, tzinfo=UTC) + dt.timedelta(days=days)  # sampled 10:00 UTC
        rule = Availability(at, {"FW-LAB": 3.0})
        in_sql = readings_frame(sqlite_engine, variables=["chlorophyll_a"], available=rule)
        assert in_sql.value.tolist() == rule.filter(every).value.tolist() == [12.0, 13.0][:max(0, days - 2)]
        assert len(readings_frame(sqlite_engine, variables=["chlorophyll_a"], available=Availability(at))) == 2


# ---------------------------------------------------------------- a whole replay


def run_record(engine) -> dict:
    """Every stored run by analysis time: status, message, values, members (the baselines' too), checkpoint."""
    from sqlalchemy import select

    from monitor.store import schema

    out = {}
    with engine.connect() as conn:
        checkpoints = {r.time_utc: bytes(r.data) for r in conn.execute(select(schema.checkpoints))}
        for run in conn.execute(select(schema.forecast_runs).order_by(schema.forecast_runs.c.analysis_utc)):
            v = schema.forecast_values
            values = conn.execute(select(v.c.basin_id, v.c.valid_utc, v.c.quantity, v.c.statistic, v.c.value)
                                  .where(v.c.run_id == run.id).order_by(*v.c)).all()
            m = schema.forecast_members
            members = conn.execute(select(m.c.basin_id, m.c.quantity, m.c.forecaster, m.c.variable, m.c.data)
                                   .where(m.c.run_id == run.id).order_by(m.c.basin_id, m.c.quantity, m.c.forecaster)
                                   ).all()
            out[run.analysis_utc] = (run.status, run.message, values, members, checkpoints.get(run.analysis_utc))
    return out


def test_a_late_lab_day_changes_no_replayed_run_before_it_became_available_and_changes_the_next(tmp_path):
    """Tallowmere Pond (invented, lab only, reporting delay 3 days, no weather feed: the forecast's water
    temperature comes from the readings): the replayed runs of a store without one day's lab values are
    byte-identical to those of the full store until that day's values became available, and differ after."""
    from monitor.store.db import open_store
    from monitor.verification.replay import analysis_days, replay
    from tests.monitor.app.onboarding_run import as_csv, local_midnight, onboard

    held_out = dt.date(2026, 6, 5)  # whole-day values: stored at the end of the local day, available 3 days on
    available_at = local_midnight(held_out + dt.timedelta(days=1 + 3))
    records = {}
    for name in ("full", "without"):
        (tmp_path / name).mkdir()
        config, header, rows = onboard(tmp_path / name)
        assert config.station("TM-1").reporting_delay_days == 3
        kept = [r for r in rows if dt.date.fromisoformat(r[0]) <= dt.date(2026, 6, 30)
                and (name == "full" or dt.date.fromisoformat(r[0]) != held_out)]
        live = open_store(config.service.database_url)
        batch = ingest_bytes(live, config, config.feed("tallowmere-lab"), as_csv(header, kept), "lab/all.csv",
                             now=local_midnight(dt.date(2026, 7, 1)))
        assert batch.accepted == len(kept)
        days = analysis_days(local_midnight(dt.date(2026, 6, 1)), local_midnight(dt.date(2026, 6, 11)))
        scratch, _ = replay(config, live, days, folder=tmp_path / name / "replay")
        records[name] = run_record(scratch)
        scratch.dispose()
        live.dispose()
    full, without = records["full"], records["without"]
    assert full.keys() == without.keys() and len(full) == 11
    before = [t for t in full if t < available_at]
    after = [t for t in full if t >= available_at]
    assert len(before) == 8 and len(after) == 3  # 1–8 June before, 9–11 June after
    for t in before:
        assert full[t] == without[t], t
    for t in after:
        assert full[t][2] != without[t][2] and full[t][3] != without[t][3], t
