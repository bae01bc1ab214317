"""Recording a cycle is one transaction: checkpoint, run, members, alert status and events and the outbox
rows commit together or not at all, and recording the same cycle again changes nothing."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest
from sqlalchemy import func, select

from assimilation.forecast import daily_statistics
from monitor.alerting import webhooks
from monitor.alerting.subscriptions import sync_from_config
from monitor.config import parse_config
from monitor.forecasting import cycle
from monitor.forecasting.quantities import QUANTITIES
from monitor.store import runs as store
from monitor.store import schema
from monitor.store.db import open_store
from monitor.store.lease import LeaseLost
from monitor.timeutil import to_epoch_days

T0 = dt.datetime(2026, 8, 1, tzinfo=dt.UTC)
HORIZON = 3
TABLES = ("checkpoints", "forecast_runs", "forecast_values", "forecast_members", "alert_status", "alert_events",
          "outbox")


@pytest.fixture
def setup(tmp_path):
    cfg = parse_config({
        "service": {"database": f"sqlite:///{tmp_path / 'record.sqlite'}", "base_url": "http://bloomline.test"},
        "filter": {"spin_up_cycles": 0},
        "water_bodies": [{"id": "hollin", "name": "Hollin Mere", "use": "drinking-water",
                          "alerts": {"horizon_days": HORIZON},
                          "basins": [{"id": "arm", "name": "Reed Arm", "volume_m3": 1e6, "mean_depth_m": 4.0,
                                      "area_m2": 2.5e5}]}],
        "subscribers": [{"name": "Gil", "email": "gil@hollin.example", "water_bodies": ["hollin"]}],
        "webhooks": [{"name": "utility", "url": "http://127.0.0.1:9/hook", "secret": "s" * 20}],
    })
    engine = open_store(cfg.service.database_url)
    store.sync_config(engine, cfg)
    sync_from_config(engine, cfg, T0)
    yield cfg, engine
    engine.dispose()


def outputs(analysis: dt.datetime, cyano_ugL: float) -> cycle.CycleOutputs:
    """A finished cycle of Hollin Mere whose members all sit at ``cyano_ugL`` (WHO 1999 level 1 is 1 µg/L)."""
    t0 = float(to_epoch_days(analysis))
    save = t0 + np.arange(0, 24 * HORIZON + 1) / 24.0
    rng = np.random.default_rng(3)
    values = cyano_ugL * np.exp(0.05 * rng.standard_normal((save.size, 10, 1)))
    forecasts = {q: daily_statistics(save, values, t0, HORIZON, (1.0, 50.0) if q == "cyanobacteria_chlorophyll" else ())
                 for q in QUANTITIES}
    return cycle.CycleOutputs("hollin", t0, "ok", "", b"checkpoint of " + analysis.isoformat().encode(), {"n": 1},
                              forecasts, ("arm",))


def counts(engine) -> dict[str, int]:
    with engine.connect() as conn:
        return {t: conn.execute(select(func.count()).select_from(schema.metadata.tables[t])).scalar() for t in TABLES}


def test_a_failure_late_in_recording_leaves_nothing_visible(setup, monkeypatch):
    cfg, engine = setup
    before = counts(engine)

    def broken(*args, **kwargs):
        raise RuntimeError("disk full while queueing the forecast webhook")

    monkeypatch.setattr(webhooks, "enqueue_forecast", broken)
    with pytest.raises(RuntimeError, match="disk full"):
        cycle.record(engine, cfg, outputs(T0, 5.0), now=T0)
    assert counts(engine) == before  # no checkpoint without its run, no run without its alert level


def test_the_whole_cycle_commits_together(setup):
    cfg, engine = setup
    summary = cycle.record(engine, cfg, outputs(T0, 5.0), now=T0)
    (event,) = summary["events"]
    assert (event["from_level"], event["to_level"], event["emails"], event["webhooks"]) == (0, 1, 1, 1)
    with engine.connect() as conn:
        status = conn.execute(select(schema.alert_status)).one()
        checkpoint = conn.execute(select(schema.checkpoints.c.time_utc)).scalar()
        kinds = sorted(conn.execute(select(schema.outbox.c.channel, schema.outbox.c.subject)).all())
    assert (status.level, status.updated_utc, checkpoint) == (1, T0, T0)
    assert [k[0] for k in kinds] == ["email", "webhook", "webhook"]
    assert sorted(k[1] for k in kinds if k[0] == "webhook") == ["alert.changed", "forecast.issued"]


def test_recording_the_same_cycle_again_changes_nothing(setup):
    cfg, engine = setup
    first = cycle.record(engine, cfg, outputs(T0, 5.0), now=T0)
    after_first = counts(engine)
    again = cycle.record(engine, cfg, outputs(T0, 5.0), now=T0 + dt.timedelta(hours=1))
    assert again["run_id"] == first["run_id"] and again["events"] == []
    assert counts(engine) == after_first


def test_a_guard_that_refuses_stops_the_whole_record(setup):
    cfg, engine = setup
    before = counts(engine)

    def not_the_leader(conn):
        raise LeaseLost("another scheduler holds the lease")

    with pytest.raises(LeaseLost, match="another scheduler"):
        cycle.record(engine, cfg, outputs(T0, 5.0), now=T0, guard=not_the_leader)
    assert counts(engine) == before


def test_the_published_level_is_the_newest_runs(setup):
    cfg, engine = setup
    for day, value in enumerate([0.2, 5.0, 5.0, 0.2]):
        t = T0 + dt.timedelta(days=day)
        cycle.record(engine, cfg, outputs(t, value), now=t)
        with engine.connect() as conn:
            newest = conn.execute(select(func.max(schema.forecast_runs.c.analysis_utc))).scalar()
            status = conn.execute(select(schema.alert_status)).one()
        assert status.updated_utc == newest == t
        assert status.level == (1 if day in (1, 2, 3) else 0)  # raised at once, cleared only after quiet cycles
