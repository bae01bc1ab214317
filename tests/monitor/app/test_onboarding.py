"""Onboarding: Tallowmere Pond (invented, ``sample_feeds/onboarding/``) loaded as a new user would, from a long
lab CSV with a minimal config, and run through daily cycles.

The lab reports three days after each day (the station's ``reporting_delay_days``), so every cycle takes in
late whole-day values. Checked: every row is accounted for (stored, censored or rejected with a reason) and
none is rejected for an annotated unit or a declared variable; a late lab result changes the next analysis;
the forecast water temperature stays within the recent observed range; every run names the substituted
drivers; a checkpoint older than the cold-start gap means a cold start; no cycle outside the season.
"""

from __future__ import annotations

import datetime as dt

import pytest

from tests.monitor.app.onboarding_run import (
    HERE,
    check_a_late_lab_result_changes_the_analysis,
    check_every_row_accounted_for,
    check_every_run_names_the_substituted_drivers,
    check_forecast_water_temperature_within_recent_range,
    check_re_analysed_from_a_checkpoint,
    local_midnight,
    run_days,
)


@pytest.fixture(scope="module")
def june(tmp_path_factory):
    out = run_days(tmp_path_factory.mktemp("tallowmere"), dt.date(2026, 6, 1), dt.date(2026, 6, 21))
    yield out
    out.close()


def test_every_row_is_stored_censored_or_rejected_with_a_reason_and_none_for_a_unit_or_a_declared_variable(june):
    check_every_row_accounted_for(june)


def test_every_run_names_the_substituted_drivers_and_late_lab_results_are_re_analysed(june):
    summaries = june.summaries
    check_every_run_names_the_substituted_drivers(summaries)
    assert summaries[0]["message"].count("cold start") == 1
    # from the fifth day on there is a checkpoint before each day's late lab values to re-analyse from
    check_re_analysed_from_a_checkpoint(summaries[4:])
    assert sum(s["status"] == "degraded" for s in summaries) >= len(summaries) - 4


def test_a_late_lab_result_changes_the_next_analysis(june):
    check_a_late_lab_result_changes_the_analysis(june, dt.date(2026, 6, 15))


def test_the_forecast_water_temperature_stays_within_the_recent_observed_range(june):
    for day in (dt.date(2026, 6, 7), dt.date(2026, 6, 14), dt.date(2026, 6, 21)):
        check_forecast_water_temperature_within_recent_range(june, day)


def test_an_old_checkpoint_means_a_cold_start_and_no_cycle_runs_outside_the_season(june):
    service = june.service
    later = local_midnight(dt.date(2026, 8, 3))  # 43 days after the last cycle (cold_start_gap_days 30)
    service.clock = lambda: later
    summary = service.run_cycles(later)[0]
    assert "cold start: the newest checkpoint (2026-06-20 23:00 UTC) is more than 30 days old" in summary["message"]
    outside = local_midnight(dt.date(2026, 11, 2))
    service.clock = lambda: outside
    skipped = service.run_cycles(outside)[0]
    assert skipped["status"] == "out_of_season" and skipped["run_id"] is None
    assert "04-01 to 10-31" in skipped["message"]


def test_the_dataset_is_what_its_seeded_script_writes(tmp_path):
    import importlib.util

    spec = importlib.util.spec_from_file_location("generate_onboarding", HERE / "generate_onboarding.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    written = module.write(20260401, tmp_path)
    assert written.read_bytes() == (HERE / "data" / "tallowmere_2026.csv").read_bytes()
