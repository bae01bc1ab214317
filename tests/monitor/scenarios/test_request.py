"""What-if requests are checked once, at the door, with a short message naming the action and the key."""

from __future__ import annotations

import pytest

from monitor.scenarios.request import (
    MAX_HORIZON_DAYS,
    FlowAction,
    IntakeAction,
    LoadAction,
    RequestError,
    parse_action_text,
    parse_request,
)
from tests.monitor.scenarios.wrenfield import wrenfield_config

RELEASE = {"kind": "release", "basin": "upper-arm", "flow_m3s": 2, "from_day": 1, "days": 3}


@pytest.fixture
def wb(tmp_path):
    return wrenfield_config(tmp_path).water_body("wrenfield")


def test_text_actions_of_the_command_line_become_the_api_mapping():
    assert parse_action_text("release basin=upper-arm flow_m3s=2 from_day=1 days=3") == {
        "kind": "release", "basin": "upper-arm", "flow_m3s": "2", "from_day": "1", "days": "3"}
    assert parse_action_text("intake basin='lower-basin'") == {"kind": "intake", "basin": "lower-basin"}


@pytest.mark.parametrize(("text", "message"), [
    ("", "an action needs a kind"),
    ("release basin", "expected key=value, got 'basin'"),
    ("release basin=a basin=b", "basin given twice"),
])
def test_malformed_text_actions_are_refused(text, message):
    with pytest.raises(RequestError, match=message):
        parse_action_text(text)


def test_a_valid_request_is_parsed_with_units_and_the_water_bodys_horizon(wb):
    req = parse_request({"actions": [
        RELEASE,
        {"kind": "transfer", "basin": "lower-basin", "flow_m3s": "1.5", "from_day": "2", "days": "1",
         "nitrogen_ugL": "300", "phosphorus_ugL": 4, "temperature_C": ""},
        {"kind": "load", "inflow": "wren-brook", "from_day": 1, "phosphorus_pct": -50},
        {"kind": "intake", "basin": "upper-arm"}]}, wb)
    assert req.horizon_days == wb.alerts.horizon_days == 5
    assert req.members is None
    assert req.actions == (FlowAction("release", "upper-arm", 2.0, 1, 3.0),
                           FlowAction("transfer", "lower-basin", 1.5, 2, 1.0, 300.0, 4.0, None),
                           LoadAction("wren-brook", 1, 0.0, -50.0), IntakeAction("upper-arm"))
    assert req.intake == IntakeAction("upper-arm")
    # the request's own mapping parses back to the same request (the page's address, the API body)
    assert parse_request(req.as_dict(), wb) == req


@pytest.mark.parametrize(("data", "message"), [
    ({"actions": []}, "actions must be a list of one or more actions"),
    ({"actions": [RELEASE], "when": 1}, "unknown key 'when'"),
    ({"actions": [RELEASE], "horizon_days": MAX_HORIZON_DAYS + 1}, "horizon_days must be a whole number from 1 to 14"),
    ({"actions": [RELEASE], "members": 1000}, "members must be a whole number from 2 to 100"),
    ({"actions": [RELEASE] * 11}, "at most 10 actions"),
    ({"actions": [{"kind": "flush"}]}, r"action 1: kind must be one of release, transfer, load, intake; got 'flush'"),
    ({"actions": [{**RELEASE, "flow": 2}]}, r"action 1 \(release\): unknown key 'flow'"),
    ({"actions": [{**RELEASE, "days": None}]}, r"action 1 \(release\): days is missing"),
    ({"actions": [{**RELEASE, "basin": "dam"}]}, "basin must be one of the basins upper-arm, lower-basin; got 'dam'"),
    ({"actions": [{**RELEASE, "flow_m3s": "lots"}]}, "flow_m3s must be a number, got 'lots'"),
    ({"actions": [{**RELEASE, "flow_m3s": 0}]}, "flow_m3s must be more than 0 m³/s"),
    ({"actions": [{**RELEASE, "flow_m3s": "nan"}]}, "flow_m3s must be a finite number"),
    ({"actions": [{**RELEASE, "from_day": 6}]}, "from_day must be a whole number from 1 to 5"),
    ({"actions": [{**RELEASE, "from_day": 1.5}]}, "from_day must be a whole number"),
    ({"actions": [{**RELEASE, "from_day": 4, "days": 3}]}, "from day 4, at most 2 \\(the horizon is 5 days\\)"),
    # 2e6 m³ exchanged in 6 hours is 92.6 m³/s
    ({"actions": [{**RELEASE, "flow_m3s": 100}]}, "would exchange Upper Arm in less than 6 hours.*at most 93 m³/s"),
    ({"actions": [{"kind": "release", "basin": "lower-basin", "flow_m3s": 100, "from_day": 1, "days": 1}]},
     "would exchange Upper Arm"),
    ({"actions": [{"kind": "transfer", "basin": "lower-basin", "flow_m3s": 1, "from_day": 1, "days": 1,
                   "nitrogen_ugL": -1, "phosphorus_ugL": 1}]}, "nitrogen_ugL must be 0 or more"),
    ({"actions": [{"kind": "transfer", "basin": "lower-basin", "flow_m3s": 1, "from_day": 1, "days": 1,
                   "nitrogen_ugL": 1, "phosphorus_ugL": 1, "temperature_C": 55}]}, "temperature_C must be from 0 to 40"),
    ({"actions": [{"kind": "load", "inflow": "wren-brook", "from_day": 1, "phosphorus_pct": -150}]},
     "phosphorus_pct must be from -100 to 1000 %"),
    ({"actions": [{"kind": "load", "inflow": "tarn", "from_day": 1}]}, "inflow must be one of the inflows wren-brook"),
    ({"actions": [{"kind": "intake", "basin": "upper-arm"}, {"kind": "intake", "basin": "lower-basin"}]},
     "at most one intake action"),
    (["release"], "a what-if request is an object"),
])
def test_bad_requests_are_refused_with_a_message_naming_the_problem(wb, data, message):
    with pytest.raises(RequestError, match=message):
        parse_request(data, wb)


def test_release_through_a_basin_no_inflow_feeds_is_refused(tmp_path):
    config = wrenfield_config(tmp_path)
    wb = config.water_body("wrenfield")
    dry = type(wb)(**{**wb.__dict__, "inflows": ()})
    with pytest.raises(RequestError, match="no inflow feeds upper-arm, so no water can be released"):
        parse_request({"actions": [RELEASE]}, dry)


def test_an_intake_move_is_refused_for_a_recreational_water(tmp_path):
    config = wrenfield_config(tmp_path)
    wb = config.water_body("wrenfield")
    lake = type(wb)(**{**wb.__dict__, "use": "recreation"})
    with pytest.raises(RequestError, match="Wrenfield Water is a recreation water body and has no drinking-water"):
        parse_request({"actions": [{"kind": "intake", "basin": "upper-arm"}]}, lake)
