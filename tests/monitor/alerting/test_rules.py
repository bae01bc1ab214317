"""Alert rule with hysteresis: the pure decision and the store wrapper."""

from __future__ import annotations

import datetime as dt

import pytest
from sqlalchemy import func, insert, select

from monitor.alerting.caution import CAUTION
from monitor.alerting.frameworks import FRAMEWORKS
from monitor.alerting.rules import decide, evaluate_run, target_level
from monitor.alerting.subscriptions import sync_from_config
from monitor.config import parse_config
from monitor.store.db import open_store
from monitor.store.schema import alert_events, alert_status, forecast_runs, forecast_values, outbox, water_bodies

UTC = dt.UTC
T0 = dt.datetime(2026, 8, 1, 6, 0, tzinfo=UTC)
DAY = dt.timedelta(days=1)
# WHO (2003) recreational guidance levels: 10 and 50 µg/L chlorophyll-a with cyanobacterial
# dominance (Guidelines for Safe Recreational Water Environments, vol. 1, ch. 8) [verified]
LEVELS = FRAMEWORKS["who-2003-recreation"].levels


def rule(level, quiet, p, observed=None, *, clear_after=3, warn=0.5, have_forecast=True):
    return decide(level, quiet, p, observed, levels=LEVELS, warn_probability=warn,
                  clear_after_cycles=clear_after, have_forecast=have_forecast)


# ---------------------------------------------------------------- the pure rule


def test_who_recreational_levels_are_the_defaults_the_rule_uses():
    # WHO (2003), ch. 8 [verified]: 10 µg/L and 50 µg/L
    assert [lv.chlorophyll_ugL for lv in LEVELS] == [10.0, 50.0]


def test_forecast_probability_at_the_warn_probability_fires_and_just_below_does_not():
    assert target_level({1: 0.5}, None, LEVELS, 0.5)[0] == 1
    assert target_level({1: 0.4999}, None, LEVELS, 0.5)[0] == 0


def test_observed_value_at_a_threshold_fires_that_level_without_forecast():
    assert target_level({}, 10.0, LEVELS, 0.5)[0] == 1
    assert target_level({1: 0.0, 2: 0.0}, 9.99, LEVELS, 0.5)[0] == 0
    assert target_level({1: 0.1}, 55.0, LEVELS, 0.5)[0] == 2


def test_target_is_the_highest_firing_level():
    assert target_level({1: 0.9, 2: 0.6}, None, LEVELS, 0.5)[0] == 2
    assert target_level({1: 0.9, 2: 0.2}, None, LEVELS, 0.5)[0] == 1


def test_escalation_is_immediate_and_skips_levels():
    d = rule(0, 0, {1: 0.95, 2: 0.7})
    assert (d.level, d.changed, d.probability) == (2, True, 0.7)


def test_escalation_carries_probability_and_observed_value():
    d = rule(0, 0, {1: 0.2}, observed=12.0)
    assert (d.level, d.probability, d.observed_ugL) == (1, 0.2, 12.0)
    assert "observed 12.00" in d.reason


def test_clearing_waits_for_the_configured_number_of_quiet_cycles():
    level, quiet, changes = 1, 0, []
    for _cycle in range(4):
        d = rule(level, quiet, {1: 0.1}, observed=3.0, clear_after=3)
        level, quiet = d.level, d.quiet_cycles
        changes.append(d.changed)
    assert changes == [False, False, True, False]
    assert level == 0


def test_a_firing_cycle_resets_the_quiet_count():
    d = rule(1, 2, {1: 0.8}, clear_after=3)
    assert (d.level, d.quiet_cycles, d.changed) == (1, 0, False)


def test_lowering_steps_down_to_the_target_not_to_zero():
    d = rule(2, 2, {1: 0.9, 2: 0.1}, observed=20.0, clear_after=3)
    assert (d.level, d.changed) == (1, True)


def test_a_cycle_without_forecast_neither_clears_nor_counts_as_quiet():
    d = rule(1, 2, {}, observed=None, clear_after=3, have_forecast=False)
    assert (d.level, d.quiet_cycles, d.changed) == (1, 2, False)


def test_a_cycle_without_forecast_still_raises_on_the_observation():
    d = rule(0, 0, {}, observed=11.0, have_forecast=False)
    assert (d.level, d.changed) == (1, True)


# ---------------------------------------------------------------- the store wrapper


def make_config(tmp_path, **alerts):
    data = {
        "service": {"database": f"sqlite:///{tmp_path / 'alerts.sqlite'}", "base_url": "http://bloomline.test"},
        "water_bodies": [{
            "id": "tarnby", "name": "Tarnby Water", "use": "recreation",
            "basins": [{"id": "north", "name": "North Reach", "volume_m3": 1e6, "mean_depth_m": 2.0,
                        "area_m2": 5e5, "flows_to": "south"},
                       {"id": "south", "name": "South Reach", "volume_m3": 2e6, "mean_depth_m": 3.0,
                        "area_m2": 6e5}],
            "alerts": {"warn_probability": 0.5, "horizon_days": 3, "clear_after_cycles": 2, **alerts},
        }],
        "subscribers": [
            {"name": "Bo Tarn", "email": "bo@tarnby.example", "water_bodies": ["tarnby"], "min_level": 1},
            {"name": "Cy Reach", "email": "cy@tarnby.example", "water_bodies": ["tarnby"], "min_level": 2},
        ],
    }
    return parse_config(data)


@pytest.fixture
def store(tmp_path):
    cfg = make_config(tmp_path)
    engine = open_store(cfg.service.database_url)
    with engine.begin() as conn:
        conn.execute(insert(water_bodies).values(id="tarnby", name="Tarnby Water", use="recreation",
                                                 timezone="UTC", framework="who-2003-recreation"))
    sync_from_config(engine, cfg, T0)
    yield cfg, engine
    engine.dispose()


def store_run(engine, day: int, p1: dict, p2: dict | None = None, *, horizon=3, wb="tarnby"):
    """A run at T0 + day with p_level_1/2 per basin, the same on days 0..horizon unless a list."""
    t = T0 + day * DAY
    with engine.begin() as conn:
        run_id = conn.execute(insert(forecast_runs).values(
            water_body_id=wb, analysis_utc=t, created_at=t, status="ok", message="")).inserted_primary_key[0]
        rows = []
        for n, probs in ((1, p1), (2, p2 or {})):
            for basin, p in probs.items():
                per_day = p if isinstance(p, list) else [p] * (horizon + 1)
                for k, pk in enumerate(per_day):
                    rows.append(dict(run_id=run_id, basin_id=basin, valid_utc=t + k * DAY,
                                     quantity="cyanobacteria_chlorophyll", statistic=f"p_level_{n}", value=pk))
        if rows:
            conn.execute(insert(forecast_values), rows)
    return int(run_id)


def count(engine, table):
    with engine.connect() as conn:
        return conn.execute(select(func.count()).select_from(table)).scalar_one()


def test_raise_writes_status_event_and_one_email_per_subscriber_at_that_level(store):
    cfg, engine = store
    run = store_run(engine, 0, {"north": 0.8, "south": 0.1}, {"north": 0.1, "south": 0.0})
    events = evaluate_run(engine, cfg, "tarnby", run, {"north": 4.0, "south": None}, now=T0)
    assert [(e["basin_id"], e["from_level"], e["to_level"]) for e in events] == [("north", 0, 1)]
    assert events[0]["probability"] == 0.8 and events[0]["observed_ugL"] == 4.0
    assert events[0]["emails"] == 1
    with engine.connect() as conn:
        mails = conn.execute(select(outbox)).all()
        st = {r.basin_id: r.level for r in conn.execute(select(alert_status))}
    assert st == {"north": 1, "south": 0}
    assert [m.recipient for m in mails] == ["bo@tarnby.example"]  # cy wants level 2 and above only
    assert CAUTION in mails[0].body and "North Reach" in mails[0].subject


def test_rerunning_the_same_run_changes_nothing(store):
    cfg, engine = store
    run = store_run(engine, 0, {"north": 0.9, "south": 0.9}, {"north": 0.9, "south": 0.0})
    first = evaluate_run(engine, cfg, "tarnby", run, {}, now=T0)
    with engine.connect() as conn:
        before = conn.execute(select(alert_status).order_by(alert_status.c.basin_id)).all()
    again = evaluate_run(engine, cfg, "tarnby", run, {}, now=T0 + DAY)
    with engine.connect() as conn:
        after = conn.execute(select(alert_status).order_by(alert_status.c.basin_id)).all()
    assert len(first) == 2 and again == []
    assert before == after
    assert count(engine, alert_events) == 2
    assert count(engine, outbox) == 3  # north: bo + cy (level 2); south: bo


def test_only_forecast_days_one_to_horizon_count(store):
    cfg, engine = store
    # p high on day 0 (the analysis) and on day 4 (beyond the 3-day horizon): no warning
    run = store_run(engine, 0, {"north": [0.9, 0.1, 0.2, 0.3, 0.9, 0.9]}, horizon=5)
    assert evaluate_run(engine, cfg, "tarnby", run, {}, now=T0) == []
    run = store_run(engine, 1, {"north": [0.0, 0.1, 0.2, 0.55]})
    assert [e["to_level"] for e in evaluate_run(engine, cfg, "tarnby", run, {}, now=T0)] == [1]


def test_full_episode_gives_one_raise_and_one_clear_with_emails(store):
    cfg, engine = store
    # daily p_level_1 in North Reach and the observed value; clear_after_cycles = 2
    season = [(0.1, 2.0), (0.7, 6.0), (0.9, 12.0), (0.8, 11.0), (0.2, 9.0), (0.6, 8.0), (0.3, 7.0),
              (0.2, 5.0), (0.1, 3.0), (0.1, 2.0)]
    changes = []
    for day, (p, obs) in enumerate(season):
        run = store_run(engine, day, {"north": p})
        for e in evaluate_run(engine, cfg, "tarnby", run, {"north": obs}, now=T0 + day * DAY):
            changes.append((day, e["from_level"], e["to_level"]))
    # raised on day 1; day 4 quiet (1 of 2), day 5 fires again (reset); day 6 (p 0.3) is below the warning
    # probability 0.5 but not below the clearing probability 0.25 (reset again); days 7–8 quiet → cleared on day 8
    assert changes == [(1, 0, 1), (8, 1, 0)]
    with engine.connect() as conn:
        mails = conn.execute(select(outbox).order_by(outbox.c.id)).all()
    assert [m.recipient for m in mails] == ["bo@tarnby.example"] * 2
    assert "cleared" in mails[1].subject and "no alert level forecast" in mails[1].subject
    assert "safe" not in mails[1].subject.lower()
    assert "not a safety clearance" in mails[1].body


def test_clearing_waits_while_the_observation_is_still_above_the_level(store):
    cfg, engine = store
    # WHO (2003) guidance level 1 = 10 µg/L [verified]; observed 10.5 keeps level 1 firing
    changes = []
    for day, (p, obs) in enumerate([(0.9, 4.0), (0.1, 10.5), (0.1, 10.5), (0.1, 10.5), (0.1, 9.0), (0.1, 8.0)]):
        run = store_run(engine, day, {"north": p})
        changes += [(day, e["to_level"]) for e in evaluate_run(engine, cfg, "tarnby", run, {"north": obs}, now=T0)]
    assert changes == [(0, 1), (5, 0)]


def test_thresholds_come_from_the_config(tmp_path):
    cfg = make_config(tmp_path, framework="custom",
                      levels=[{"name": "Watch", "chlorophyll_ugL": 3.0}, {"name": "Act", "chlorophyll_ugL": 7.0}])
    engine = open_store(cfg.service.database_url)
    with engine.begin() as conn:
        conn.execute(insert(water_bodies).values(id="tarnby", name="Tarnby Water", use="recreation",
                                                 timezone="UTC", framework="custom"))
    run = store_run(engine, 0, {})
    events = evaluate_run(engine, cfg, "tarnby", run, {"north": 7.5, "south": 3.2}, now=T0)
    assert {e["basin_id"]: (e["to_level"], e["level_name"]) for e in events} == {
        "north": (2, "Act"), "south": (1, "Watch")}
    engine.dispose()


def test_an_older_run_evaluated_after_a_newer_one_changes_nothing(store):
    cfg, engine = store
    new = store_run(engine, 5, {"north": 0.1})
    old = store_run(engine, 4, {"north": 0.9})
    evaluate_run(engine, cfg, "tarnby", new, {}, now=T0)
    assert evaluate_run(engine, cfg, "tarnby", old, {}, now=T0) == []


def test_an_unknown_run_or_water_body_is_refused(store):
    cfg, engine = store
    run = store_run(engine, 0, {"north": 0.9})
    with pytest.raises(KeyError, match="unknown water body 'elsewhere'"):
        evaluate_run(engine, cfg, "elsewhere", run, {}, now=T0)
    with pytest.raises(ValueError, match="no forecast run with id 999"):
        evaluate_run(engine, cfg, "tarnby", 999, {}, now=T0)
    assert count(engine, alert_events) == 0


def test_a_probability_hovering_around_the_warning_threshold_does_not_flap_the_level():
    # hysteresis in probability: raised at 0.5, counted towards clearing only below 0.25
    level, quiet, changes = 0, 0, 0
    for p in [0.55, 0.45, 0.52, 0.40, 0.60, 0.35, 0.51, 0.30] * 3:
        d = decide(level, quiet, {1: p}, None, levels=LEVELS, warn_probability=0.5, clear_after_cycles=2)
        changes += d.changed
        level, quiet = d.level, d.quiet_cycles
    assert changes == 1 and level == 1


def test_the_level_clears_once_the_probability_stays_below_the_clearing_threshold():
    level, quiet = 1, 0
    for _ in range(2):
        d = decide(level, quiet, {1: 0.2}, 0.1, levels=LEVELS, warn_probability=0.5, clear_after_cycles=2,
                   clear_probability=0.3)
        level, quiet = d.level, d.quiet_cycles
    assert level == 0 and d.changed
