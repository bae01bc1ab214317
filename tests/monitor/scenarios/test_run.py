"""A what-if runs today's analysis with and without the actions, as the cycle forecasts, and writes nothing."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest
from sqlalchemy import select

from assimilation.forecast import QUANTILES
from monitor.alerting.caution import CAUTION
from monitor.scenarios.request import parse_request
from monitor.scenarios.run import SCENARIO_NOTICE, NoAnalysis, run_what_if
from monitor.scenarios.skill import recent_skill
from monitor.store import schema, status
from monitor.store.db import open_store
from monitor.store.runs import load_forecast_members
from tests.monitor.scenarios.wrenfield import ANALYSIS, FIRST, wrenfield_config, wrenfield_store

RELEASE = {"kind": "release", "basin": "upper-arm", "flow_m3s": 3, "from_day": 1, "days": 3}
LOAD = {"kind": "load", "inflow": "wren-brook", "from_day": 2, "phosphorus_pct": -60}


@pytest.fixture(scope="module")
def store(tmp_path_factory):
    config, service = wrenfield_store(tmp_path_factory.mktemp("wrenfield"))
    yield config, service.engine
    service.close()


def _what_if(store, data, now=ANALYSIS):
    config, engine = store
    wb = config.water_body("wrenfield")
    return run_what_if(engine, config, wb, parse_request(data, wb), now=now)


def _dump(engine) -> dict:
    with engine.connect() as conn:
        return {t.name: conn.execute(select(t)).all() for t in schema.metadata.sorted_tables}


def test_a_scenario_writes_nothing_to_the_store(store):
    config, engine = store
    before = _dump(engine)
    assert before["checkpoints"] and before["forecast_runs"]  # a store with something to change
    _what_if(store, {"actions": [RELEASE, LOAD, {"kind": "intake", "basin": "upper-arm"}]})
    recent_skill(engine, config, config.water_body("wrenfield"), now=ANALYSIS)
    assert _dump(engine) == before


def _process_members(engine, quantity="cyanobacteria_chlorophyll") -> dict:
    """The issued run's own process-model members (days, M) per basin, as stored for verification."""
    run = status.latest_run(engine, "wrenfield")
    assert run["analysis_utc"] == ANALYSIS
    stored = load_forecast_members(engine, [run["id"]])
    return {basin: arr for (_, basin, q, forecaster), (_, arr) in stored.items()
            if q == quantity and forecaster == "process_model"}


@pytest.mark.parametrize(("action", "rel"), [(LOAD, 1e-5), (RELEASE, 1e-5)])
def test_without_the_action_the_scenario_is_the_process_forecast_the_cycle_issued(store, action, rel):
    # same members, parameters, drivers and model-error draws: the run without the action is the cycle's
    # process-model forecast (stored as float32 member daily means; a release adds zero-flow columns)
    result = _what_if(store, {"actions": [action]})
    stored = _process_members(store[1])
    assert result["analysis_utc"] == "2026-08-12T00:00:00Z" and result["members"] == 20
    assert stored, "the cycle stored its process-model members"
    checked = 0
    for basin in result["basins"]:
        if basin["id"] not in stored:
            continue
        members = stored[basin["id"]][:, :20]
        for day in basin["quantities"]["cyanobacteria_chlorophyll"]:
            row = members[day["day"]]
            want = {"mean": row.mean(), **{f"q{round(q * 100):02d}": v
                                           for q, v in zip(QUANTILES, np.quantile(row, QUANTILES))}}
            for stat, value in want.items():
                assert day["without"][stat] == pytest.approx(value, rel=rel, abs=1e-6)
                checked += 1
    assert checked >= 6 * 8


def test_a_release_through_the_upper_arm_dilutes_it_and_costs_flow_times_duration(store):
    result = _what_if(store, {"actions": [RELEASE]})
    arm = next(b for b in result["basins"] if b["id"] == "upper-arm")
    days = arm["quantities"]["cyanobacteria_chlorophyll"]
    assert days[0]["difference"] == {"q05": 0.0, "q50": 0.0, "q95": 0.0, "mean": 0.0}   # the shared analysis
    for day in days[1:]:
        assert day["difference"]["q95"] < 0          # every member lower than without the release
        assert day["difference"]["q05"] <= day["difference"]["q50"] <= day["difference"]["q95"]
    assert result["budget"]["water_m3"] == pytest.approx(3 * 3 * 86400, rel=1e-9)
    # the drivers are hourly and linear in time: switching off is spread over the hour about the end
    water = [d["water_m3"] for d in result["budget"]["days"]]
    assert water[0] == pytest.approx(3 * 86400, rel=1e-9) and water[1] == pytest.approx(3 * 86400, rel=1e-9)
    assert 0 < water[3] < 3 * 3600 and water[4] == 0.0
    # the released brook water brings its phosphorus: 3 m³/s · 25 µg/L · 3 d
    assert result["budget"]["phosphorus_kg"] == pytest.approx(3 * 25 * 3 * 86400 * 1e-6, rel=1e-9)


def test_a_phosphorus_load_cut_lowers_the_load_by_its_share_and_moves_no_water(store):
    result = _what_if(store, {"actions": [LOAD]})
    # 60 % of 0.6 m³/s · 25 µg/L from day 2 to the horizon (day 5): 4 days
    assert result["budget"]["phosphorus_kg"] == pytest.approx(-0.6 * 0.6 * 25 * 4 * 86400 * 1e-6, rel=1e-9)
    assert result["budget"]["water_m3"] == 0.0


def test_an_intake_move_reads_the_drinking_water_outlook_from_the_new_basin(store):
    result = _what_if(store, {"actions": [{"kind": "intake", "basin": "upper-arm"}]})
    dw = result["drinking_water"]
    assert (dw["intake_basin"], dw["intake_basin_with"]) == ("lower-basin", "upper-arm")
    by_id = {b["id"]: b for b in result["basins"]}
    assert dw["p_max_within_horizon"]["without"] == by_id["lower-basin"]["p_max_within_horizon"]["without"]
    assert dw["p_max_within_horizon"]["with"] == by_id["upper-arm"]["p_max_within_horizon"]["with"]
    # an intake move alone changes no water: the runs are the same
    assert all(d["difference"]["q50"] == 0.0 for b in result["basins"]
               for d in b["quantities"]["cyanobacteria_chlorophyll"])


def test_members_and_horizon_follow_the_request(store):
    result = _what_if(store, {"actions": [LOAD], "members": 8, "horizon_days": 14})
    assert result["members"] == 8 and result["horizon_days"] == 14
    assert [d["day"] for d in result["basins"][0]["levels"]] == list(range(15))
    assert len(result["budget"]["days"]) == 14


def test_every_scenario_carries_the_caution_and_says_it_is_a_scenario(store):
    result = _what_if(store, {"actions": [RELEASE]})
    assert result["caution"] == CAUTION
    assert result["notice"] == SCENARIO_NOTICE and "not a forecast, not advice" in SCENARIO_NOTICE
    assert result["kind"] == "what-if scenario"
    assert "statistical forecasts beside it" in result["model"]
    assert result["actions"][0]["description"].startswith("Release 3 m³/s more through Upper Arm from day 1")
    assert (result["actions"][0]["start_utc"], result["actions"][0]["end_utc"]) == ("2026-08-12T00:00:00Z",
                                                                                   "2026-08-15T00:00:00Z")


def test_the_newest_analysis_at_or_before_now_is_used(store):
    result = _what_if(store, {"actions": [RELEASE]}, now=ANALYSIS - dt.timedelta(hours=1))
    assert result["analysis_utc"] == "2026-08-11T00:00:00Z"


def test_without_a_stored_analysis_the_scenario_says_to_run_a_cycle_first(tmp_path):
    config = wrenfield_config(tmp_path)
    engine = open_store(config.service.database_url)
    wb = config.water_body("wrenfield")
    try:
        with pytest.raises(NoAnalysis, match="no analysis of Wrenfield Water is stored yet"):
            run_what_if(engine, config, wb, parse_request({"actions": [RELEASE]}, wb), now=ANALYSIS)
    finally:
        engine.dispose()


def test_recent_skill_by_lead_day_or_a_sentence_when_there_is_no_record(store):
    config, engine = store
    wb = config.water_body("wrenfield")
    skill = recent_skill(engine, config, wb, now=ANALYSIS)
    # the first run's day 1 has readings (both basins): one lead day with two pairs
    assert skill["available"] and skill["reference"] == "persistence_ensemble"
    assert [(x["lead_days"], x["pairs"]) for x in skill["by_lead"]] == [(1, 2)]
    none = recent_skill(engine, config, wb, now=FIRST - dt.timedelta(days=1))
    assert not none["available"] and none["by_lead"] == []
    assert none["message"].startswith("No verified record yet")
