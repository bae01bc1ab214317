"""The bloomline command: configuration checks and refusing to start on a bad config."""

from __future__ import annotations

from pathlib import Path

from click.testing import CliRunner

from monitor.app.cli import main

SAMPLE = Path(__file__).resolve().parents[3] / "sample_feeds" / "bloomline.toml"


def test_check_config_summarises_a_valid_file():
    result = CliRunner().invoke(main, ["check-config", str(SAMPLE)])
    assert result.exit_code == 0, result.output
    assert "corrisdale (drinking-water): 3 basin(s), 2 inflow(s); framework who-1999-drinking-water" in result.output
    assert "Alert Level 1 1 µg/L" in result.output


def test_check_config_fails_with_file_key_and_reason(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text(SAMPLE.read_text().replace('use = "recreation"', 'use = "swimming"'))
    result = CliRunner().invoke(main, ["check-config", str(bad)])
    assert result.exit_code == 1
    assert "bad.toml: water_bodies[1].use: expected one of drinking-water, recreation; got 'swimming'" in result.output


def test_service_commands_refuse_to_start_on_a_bad_config(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text(SAMPLE.read_text().replace("volume_m3 = 4.0e6", "volume_m3 = 0"))
    for command in (["serve"], ["run"], ["cycle"], ["upgrade"]):
        result = CliRunner().invoke(main, [*command, "--config", str(bad)])
        assert result.exit_code == 1, command
        assert "water_bodies[0].basins[0].volume_m3: expected a positive number" in result.output
    assert not (tmp_path / "bloomline.sqlite").exists()  # nothing was started or created
