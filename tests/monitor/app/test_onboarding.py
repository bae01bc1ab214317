"""Onboarding: Tallowmere Pond (invented, ``sample_feeds/onboarding/``) loaded as a new user would, from a long
lab CSV with a minimal config, and run through daily cycles.

The lab reports three days after each day (the station's ``reporting_delay_days``), so every cycle takes in
late whole-day values. Checked: every row is accounted for (stored, censored or rejected with a reason) and
none is rejected for an annotated unit or a declared variable; a late lab result changes the next analysis;
the forecast water temperature stays within the recent observed range; every run names the substituted
drivers; a checkpoint older than the cold-start gap means a cold start; no cycle outside the season.
"""

from __future__ import annotations

import csv
import dataclasses
import datetime as dt
import io
import tomllib
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
import pytest

from assimilation.checkpoint import Checkpoint
from monitor.app.service import Service
from monitor.config import parse_config
from monitor.forecasting import cycle
from monitor.ingest.batches import ingest_bytes
from monitor.store.db import open_store
from monitor.store.readings import readings_frame, rejected_rows_frame
from monitor.verification.replay import DiscardTransport

HERE = Path(__file__).resolve().parents[3] / "sample_feeds" / "onboarding"
LONDON = ZoneInfo("Europe/London")
ARRIVAL_DAYS = 4  # the value of day d ends at the start of d + 1 and is reported three days later


def local_midnight(day: dt.date) -> dt.datetime:
    return dt.datetime(day.year, day.month, day.day, tzinfo=LONDON).astimezone(dt.UTC)


def onboard(tmp_path):
    data = tomllib.loads((HERE / "bloomline.toml").read_text())
    data["service"]["database"] = f"sqlite:///{tmp_path / 'store.sqlite'}"
    data["service"]["archive_dir"] = str(tmp_path / "archive")
    data["feeds"][0]["path"] = str(HERE / "data")
    data["filter"] = {"members": 24}  # a smaller ensemble keeps the test quick
    config = parse_config(data, tmp_path / "bloomline.toml")
    with open(HERE / "data" / "tallowmere_2026.csv", newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))
    return config, rows[0], rows[1:]


def as_csv(header, rows) -> bytes:
    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerows([header, *rows])
    return out.getvalue().encode()


def run_days(tmp_path, first: dt.date, last: dt.date):
    config, header, rows = onboard(tmp_path)
    engine = open_store(config.service.database_url)
    feed = config.feed("tallowmere-lab")
    service = Service(config, engine=engine, transport=DiscardTransport(), clock=lambda: local_midnight(first))
    sent = [r for r in rows if dt.date.fromisoformat(r[0]) <= first - dt.timedelta(days=ARRIVAL_DAYS)]
    batches = [ingest_bytes(engine, config, feed, as_csv(header, sent), "lab/backlog.csv",
                            now=local_midnight(first))]
    summaries, inputs = [], {}
    day = first
    while day <= last:
        analysis = local_midnight(day)
        arrived = [r for r in rows if dt.date.fromisoformat(r[0]) == day - dt.timedelta(days=ARRIVAL_DAYS)]
        if arrived:
            batches.append(ingest_bytes(engine, config, feed, as_csv(header, arrived), f"lab/{day}.csv",
                                        now=analysis - dt.timedelta(minutes=5)))
            sent += arrived
        service.clock = lambda t=analysis: t
        inputs[day] = cycle.gather(engine, config, config.water_bodies[0], analysis)
        summaries.append(service.run_cycles(analysis)[0])
        day += dt.timedelta(days=1)
    return config, engine, service, sent, batches, summaries, inputs


@pytest.fixture(scope="module")
def june(tmp_path_factory):
    out = run_days(tmp_path_factory.mktemp("tallowmere"), dt.date(2026, 6, 1), dt.date(2026, 6, 21))
    yield out
    out[2].close(dispose_engine=False)
    out[1].dispose()


def test_every_row_is_stored_censored_or_rejected_with_a_reason_and_none_for_a_unit_or_a_declared_variable(june):
    config, engine, _, sent, batches, _, _ = june
    accepted = sum(b.accepted for b in batches)
    assert accepted + sum(b.rejected for b in batches) + sum(b.duplicate for b in batches) == len(sent)
    rejected = rejected_rows_frame(engine)
    assert rejected.empty, rejected.reason.tolist()  # annotated units and every declared variable accepted
    stored = readings_frame(engine, max_flag=9, include_censored=True)
    assert len(stored) == accepted
    negative = sum(1 for r in sent if float(r[3]) < 0)
    assert int(stored.censored.sum()) == negative  # blank-corrected negatives: censored, never numbers
    assert stored.whole_day.all()  # every time stamp is a date
    assert {"ph", "dissolved_oxygen", "oxygen_saturation", "ammonium"} <= set(stored.variable)


def test_every_run_names_the_substituted_drivers_and_late_lab_results_are_re_analysed(june):
    _, _, _, _, _, summaries, _ = june
    # a run without readings to analyse stays "no_data"; every other one is "degraded" for the substitutes
    assert all(s["status"] in ("degraded", "no_data") for s in summaries)
    assert all("drivers substituted: shortwave from clear-sky astronomy" in s["message"]
               and "water temperature from the recent readings" in s["message"] for s in summaries)
    assert summaries[0]["message"].count("cold start") == 1
    # from the fifth day on there is a checkpoint before each day's late lab values to re-analyse from
    assert all("re-analysed from" in s["message"] for s in summaries[4:])
    assert sum(s["status"] == "degraded" for s in summaries) >= len(summaries) - 4


def test_a_late_lab_result_changes_the_next_analysis(june):
    _, _, _, _, _, _, inputs = june
    day = dt.date(2026, 6, 15)
    given = inputs[day]
    newest = (local_midnight(day - dt.timedelta(days=1)) - dt.datetime(1970, 1, 1, tzinfo=dt.UTC)) / dt.timedelta(days=1)
    late = given.observations.time_d <= newest  # stamped before the newest checkpoint: arrived late
    assert late.any() and given.start_d < newest
    without = dataclasses.replace(given, observations=given.observations.select(~late))
    a = Checkpoint.from_bytes(cycle.compute(given).checkpoint).ensemble
    b = Checkpoint.from_bytes(cycle.compute(without).checkpoint).ensemble
    assert not np.allclose(a, b)


def test_the_forecast_water_temperature_stays_within_the_recent_observed_range(june):
    _, engine, _, _, _, _, inputs = june
    for day in (dt.date(2026, 6, 7), dt.date(2026, 6, 14), dt.date(2026, 6, 21)):
        analysis = local_midnight(day)
        recent = readings_frame(engine, variables=["water_temperature"], start=analysis - dt.timedelta(days=14),
                                end=analysis).value
        low, high = recent.min(), recent.max()
        for scenario in inputs[day].forecast_drivers:
            temps = np.asarray(scenario.water_temperature_C)
            # within the last two weeks' observed range, widened by the scenarios' spread (±1.5 °C)
            assert temps.min() >= low - 2.0 and temps.max() <= high + 2.0, (day, low, high, temps.min(), temps.max())


def test_an_old_checkpoint_means_a_cold_start_and_no_cycle_runs_outside_the_season(june):
    _, _, service, _, _, _, _ = june
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
