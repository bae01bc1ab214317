"""``bloomline what-if``: the same engine as the API, short messages for bad input, nothing written."""

from __future__ import annotations

import json
import re

import pytest
from click.testing import CliRunner

from monitor.app.cli import main
from tests.monitor.scenarios.wrenfield import wrenfield_config, wrenfield_store

RELEASE = "release basin=upper-arm flow_m3s=3 from_day=1 days=3"


@pytest.fixture(scope="module")
def config_file(tmp_path_factory):
    """The TOML file of Wrenfield Water, whose store holds two cycles."""
    tmp = tmp_path_factory.mktemp("wren-cli")
    _config, service = wrenfield_store(tmp)
    service.close()
    return tmp / "bloomline.toml"


def _run(*args):
    return CliRunner().invoke(main, ["what-if", *args])


def test_what_if_prints_both_outlooks_the_water_it_moves_and_the_caution(config_file):
    result = _run("--config", str(config_file), "--water-body", "wrenfield", "--action", RELEASE,
                  "--at", "2026-08-12T00:00Z")
    assert result.exit_code == 0, result.output
    out = result.output
    assert out.startswith("What-if scenario:") and "not a forecast, not advice" in out
    assert "Release 3 m³/s more through Upper Arm from day 1 for 3 days" in out
    assert "Water moved: 777,600 m³" in out           # 3 m³/s · 3 d · 86,400 s/d
    assert "Upper Arm — cyanobacterial chlorophyll-a" in out and "Lower Basin —" in out
    assert out.rstrip().endswith("authorities prevail.")


def test_what_if_json_is_the_api_payload(config_file):
    result = _run("--config", str(config_file), "--water-body", "wrenfield", "--action", RELEASE,
                  "--action", "intake basin=upper-arm", "--horizon", "4", "--members", "10",
                  "--at", "2026-08-12T00:00Z", "--json")
    assert result.exit_code == 0, result.output
    payload = json.loads(result.output)
    assert payload["caution"].startswith("Caution:")
    assert payload["horizon_days"] == 4 and payload["members"] == 10
    assert payload["request"]["actions"][1] == {"kind": "intake", "basin": "upper-arm"}
    assert "skill" in payload and payload["drinking_water"]["intake_basin_with"] == "upper-arm"


@pytest.mark.parametrize(("args", "message"), [
    (["--water-body", "nowhere", "--action", RELEASE], "no water body 'nowhere'; water bodies: wrenfield"),
    (["--water-body", "wrenfield", "--action", "release basin=upper-arm"], r"action 1 \(release\): flow_m3s is missing"),
    (["--water-body", "wrenfield", "--action", RELEASE, "--horizon", "30"], "horizon_days must be a whole number from 1 to 14"),
    (["--water-body", "wrenfield", "--action", RELEASE, "--at", "yesterday"],
     "Invalid value for --at: Invalid isoformat string: 'yesterday'"),
    (["--water-body", "wrenfield", "--action", RELEASE, "--at", "2026-08-01T00:00Z"], "no analysis of Wrenfield Water"),
])
def test_what_if_refuses_bad_input_with_a_short_message(config_file, args, message):
    result = _run("--config", str(config_file), *args)
    assert result.exit_code != 0
    assert re.search(message, result.output), result.output


def test_what_if_does_not_create_a_store_that_is_not_there(tmp_path):
    wrenfield_config(tmp_path, database="none.sqlite")
    result = _run("--config", str(tmp_path / "bloomline.toml"), "--water-body", "wrenfield", "--action", RELEASE)
    assert result.exit_code == 1
    assert "no store at" in result.output and "run the service or `bloomline cycle` first" in result.output
    assert not (tmp_path / "none.sqlite").exists()
