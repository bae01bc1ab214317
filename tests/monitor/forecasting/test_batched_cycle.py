"""Many water bodies in batches: the batched gather and record give exactly what the per-water-body ones give."""

from __future__ import annotations

import datetime as dt
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sqlalchemy import select

from monitor.forecasting import batch_gather, cycle
from monitor.store import schema
from tests.monitor.forecasting.same_inputs import differences
from tests.monitor.forecasting.synthetic_store import SEASON_START, synthetic_service

DAY = dt.timedelta(days=1)


def _per_body_and_batched(service, analysis, bodies, season_start=None, replay=False):
    per = {wb.id: cycle.gather(service.engine, service.config, wb, analysis, season_start=season_start, replay=replay)
           for wb in bodies}
    batched = dict(batch_gather.gather_many(service.engine, service.config, bodies, analysis,
                                            season_start=season_start, replay=replay, chunk=2))
    return per, batched


def _write_censored(engine, config, start, end, *, received_at) -> None:
    """Censored phycocyanin (below 0.4 µg/L) at each first buoy every 7 hours from ``start`` to ``end``, from a
    second source; every other one at the time of a synthetic reading (a cross-source duplicate)."""
    from sqlalchemy import insert

    times = [start + k * dt.timedelta(hours=7) + (k % 2) * dt.timedelta(minutes=30)
             for k in range(int((end - start) / dt.timedelta(hours=7)) + 1)]
    with engine.begin() as conn:
        batch = conn.execute(insert(schema.ingest_batches).values(
            feed="lab", origin="test", sha256="1" * 64, archive_path=None, received_at=received_at, status="ok",
            message="censored", received=0, accepted=0)).inserted_primary_key[0]
        conn.execute(insert(schema.readings), [
            dict(station_id=config.stations_of(wb.id, basin=wb.basins[0].id)[0].id, variable="phycocyanin",
                 time_utc=t, value=None, qc_flag=9, qc_tests="", source="lab", batch_id=batch, censored=1,
                 detection_limit=0.4) for wb in config.water_bodies for t in times])


def _edit(delayed: bool, gap: bool):
    """Config changes: reporting delays of the first buoys of every other lake; a short cold-start gap."""
    def edit(data: dict) -> None:
        if delayed:
            for st_ in data["stations"]:
                if st_["kind"] == "buoy" and st_["basin"] == "b1" and int(st_["id"].split("-")[1]) % 2:
                    st_["reporting_delay_days"] = 1.25
        if gap:
            data["filter"]["cold_start_gap_days"] = 1.5
    return edit


@settings(max_examples=4, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000), n=st.integers(1, 4), warm=st.lists(st.booleans(), min_size=4, max_size=4),
       hours=st.integers(0, 30), replay=st.booleans(), late=st.booleans(), censored=st.booleans(),
       delayed=st.booleans(), gap=st.booleans())
def test_the_batched_gather_equals_the_per_water_body_gather(seed, n, warm, hours, replay, late, censored, delayed,
                                                             gap):
    with tempfile.TemporaryDirectory() as folder:
        # 17 days of readings reach past the latest analysis (day 16¼); the gather reads two weeks back
        service = synthetic_service(Path(folder), n, seed=seed, members=6, horizon_days=2, days=17,
                                    edit=_edit(delayed, gap))
        try:
            first = SEASON_START + 14 * DAY
            if censored:
                _write_censored(service.engine, service.config, SEASON_START, first + 3 * DAY, received_at=SEASON_START)
            # some water bodies have a checkpoint (warm), the others start cold
            warm_ids = [wb.id for wb, w in zip(service.config.water_bodies, warm) if w]
            if warm_ids:
                service.batch_from = 10**6
                service.run_cycles(first, only=warm_ids, season_start=first - DAY)
            if late and warm_ids:  # a reading stamped before a checkpoint, received after it was stored
                from monitor.app.synthetic import write_readings
                write_readings(service.engine, service.config, seed=seed + 1, start=first - 2 * DAY, days=1,
                               received_at=first + DAY, cadence_minutes=1440 - 7, source="late-lab")
            analysis = first + DAY + dt.timedelta(hours=hours)
            bodies = list(reversed(service.config.water_bodies))
            per, batched = _per_body_and_batched(service, analysis, bodies, season_start=first - 3 * DAY,
                                                 replay=replay)
            assert list(batched) == [wb.id for wb in bodies]
            for wb_id in per:
                assert differences(per[wb_id], batched[wb_id], wb_id) == []
        finally:
            service.close()


def store_contents(engine) -> dict:
    """Checkpoints, runs, values and members of a store, without ids and creation times."""
    r, c = schema.forecast_runs.c, schema.checkpoints.c
    with engine.connect() as conn:
        runs = {row.id: (row.water_body_id, row.analysis_utc) for row in conn.execute(select(r.id, r.water_body_id,
                                                                                              r.analysis_utc))}
        return {
            "checkpoints": sorted((x.water_body_id, x.time_utc, bytes(x.data)) for x in conn.execute(
                select(c.water_body_id, c.time_utc, c.data))),
            "runs": sorted((x.water_body_id, x.analysis_utc, x.status, x.message) for x in conn.execute(
                select(r.water_body_id, r.analysis_utc, r.status, r.message))),
            "values": sorted((runs[x.run_id], x.basin_id, x.valid_utc, x.quantity, x.statistic, x.value)
                             for x in conn.execute(select(schema.forecast_values))),
            "members": sorted((runs[x.run_id], x.basin_id, x.quantity, x.forecaster, bytes(x.data))
                              for x in conn.execute(select(schema.forecast_members))),
        }


def _two_days(service, batch_from: int) -> list[dict]:
    service.batch_from = batch_from
    first = SEASON_START + 14 * DAY
    return [s for day in (first, first + DAY) for s in service.run_cycles(day, season_start=first - DAY)]


def test_cycles_in_batches_store_exactly_what_cycles_one_by_one_store(tmp_path):
    (tmp_path / "one").mkdir()
    (tmp_path / "batched").mkdir()
    one = synthetic_service(tmp_path / "one", 4)
    batched = synthetic_service(tmp_path / "batched", 4)
    try:
        a = _two_days(one, 10**6)
        b = _two_days(batched, 1)
        assert [(s["water_body"], s["status"], s["message"]) for s in a] == \
            [(s["water_body"], s["status"], s["message"]) for s in b]
        assert all(s["run_id"] is not None for s in b)
        assert store_contents(one.engine) == store_contents(batched.engine)
    finally:
        one.close()
        batched.close()


@pytest.mark.parametrize("step", ["gather", "compute", "record"])
def test_in_batches_a_failing_water_body_is_reported_and_rolled_back_alone(tmp_path, monkeypatch, step):
    service = synthetic_service(tmp_path, 3)
    service.batch_from = 1
    broken = service.config.water_bodies[1].id
    if step == "gather":
        real = batch_gather.assemble

        def assemble(config, wb, raw):
            if wb.id == broken:
                raise RuntimeError("gather broken on purpose")
            return real(config, wb, raw)

        monkeypatch.setattr(batch_gather, "assemble", assemble)
    elif step == "compute":
        real = cycle.compute

        def compute(inputs):
            if inputs.water_body_id == broken:
                raise RuntimeError("compute broken on purpose")
            return real(inputs)

        monkeypatch.setattr(cycle, "compute", compute)
    else:
        real = cycle.record_in

        def record_in(conn, config, outputs, observed, *, now=None):
            real(conn, config, outputs, observed, now=now)  # its writes happen, then it fails
            if outputs.water_body_id == broken:
                raise RuntimeError("record broken on purpose")
            return real(conn, config, outputs, observed, now=now)

        monkeypatch.setattr(cycle, "record_in", record_in)
    analysis = SEASON_START + 14 * DAY
    try:
        summaries = service.run_cycles(analysis, season_start=analysis - DAY)
        by_id = {s["water_body"]: s for s in summaries}
        assert [s["water_body"] for s in summaries] == [wb.id for wb in service.config.water_bodies]
        assert by_id[broken]["status"] == "failed" and f"{step} broken on purpose" in by_id[broken]["message"]
        for wb_id, s in by_id.items():
            if wb_id != broken:
                assert s["status"] in ("ok", "degraded") and s["run_id"] is not None
        stored = store_contents(service.engine)
        if step != "compute":  # a failed compute is stored as a failed run; the others leave nothing
            assert broken not in {c[0] for c in stored["checkpoints"]} | {r[0] for r in stored["runs"]}
        assert {c[0] for c in stored["checkpoints"]} >= set(by_id) - {broken}
    finally:
        service.close()


@pytest.mark.postgres
def test_the_batched_gather_and_record_on_postgresql(tmp_path, pg_engine):
    (tmp_path / "pg").mkdir()
    (tmp_path / "lite").mkdir()
    service = synthetic_service(tmp_path / "pg", 3, url=str(pg_engine.url), engine=pg_engine)
    lite = synthetic_service(tmp_path / "lite", 3)
    try:
        _two_days(service, 1)
        _two_days(lite, 10**6)
        analysis = SEASON_START + 16 * DAY
        per, batched = _per_body_and_batched(service, analysis, service.config.water_bodies)
        for wb_id in per:
            assert differences(per[wb_id], batched[wb_id], wb_id) == []
        # the same cycles recorded in batches on PostgreSQL and one by one on SQLite
        pg, sq = store_contents(service.engine), store_contents(lite.engine)
        assert pg["checkpoints"] == sq["checkpoints"] and pg["runs"] == sq["runs"]
    finally:
        service.close(dispose_engine=False)
        lite.close()
