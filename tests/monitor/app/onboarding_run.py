"""Daily cycles over Tallowmere Pond (invented, ``sample_feeds/onboarding/``) and the checks on them.

Shared by the June test (``test_onboarding.py``) and the whole-season test
(``test_onboarding_season.py``):

* :func:`run_days` loads the pond as a new user would, from its long lab CSV with the minimal config,
  and runs one cycle a day at local midnight; the lab rows of day d arrive ``ARRIVAL_DAYS`` later
  (the value of day d ends at the start of d + 1 and is reported three days after that: the station's
  ``reporting_delay_days``), so every cycle takes in late whole-day values.
* the ``check_*`` functions are the onboarding checks of a run of days; each raises AssertionError.
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
SUBSTITUTED = ("drivers substituted: shortwave from clear-sky astronomy", "water temperature from the recent readings")


@dataclasses.dataclass
class Onboarded:
    """What a run of daily cycles left: the store, the rows sent, the batches, one summary and input per day."""

    config: object
    engine: object
    service: Service
    sent: list[list[str]]
    batches: list
    summaries: list[dict]
    inputs: dict[dt.date, cycle.CycleInputs]

    def close(self) -> None:
        self.service.close(dispose_engine=False)
        self.engine.dispose()


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


def run_days(tmp_path, first: dt.date, last: dt.date) -> Onboarded:
    """Daily cycles at local midnight from ``first`` to ``last``; the lab's backlog is ingested before the first."""
    config, header, rows = onboard(tmp_path)
    engine = open_store(config.service.database_url)
    feed = config.feed("tallowmere-lab")
    service = Service(config, engine=engine, transport=DiscardTransport(), clock=lambda: local_midnight(first))
    sent = [r for r in rows if dt.date.fromisoformat(r[0]) <= first - dt.timedelta(days=ARRIVAL_DAYS)]
    batches = [ingest_bytes(engine, config, feed, as_csv(header, sent), "lab/backlog.csv",
                            now=local_midnight(first))] if sent else []
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
    return Onboarded(config, engine, service, sent, batches, summaries, inputs)


# ---------------------------------------------------------------- checks


def check_every_row_accounted_for(run: Onboarded) -> None:
    """Every row stored, censored or rejected with a reason; none rejected for a unit or a declared variable."""
    accepted = sum(b.accepted for b in run.batches)
    assert accepted + sum(b.rejected for b in run.batches) + sum(b.duplicate for b in run.batches) == len(run.sent)
    rejected = rejected_rows_frame(run.engine)
    assert rejected.empty, rejected.reason.tolist()  # annotated units and every declared variable accepted
    stored = readings_frame(run.engine, max_flag=9, include_censored=True)
    assert len(stored) == accepted
    negative = sum(1 for r in run.sent if float(r[3]) < 0)
    assert int(stored.censored.sum()) == negative  # blank-corrected negatives: censored, never numbers
    assert stored.whole_day.all()  # every time stamp is a date
    assert {"ph", "dissolved_oxygen", "oxygen_saturation", "ammonium"} <= set(stored.variable)


def check_every_run_names_the_substituted_drivers(summaries: list[dict]) -> None:
    """No weather feed: every cycle is "degraded" (or "no_data" before any reading) and names both substitutes."""
    assert all(s["status"] in ("degraded", "no_data") for s in summaries), \
        [(s["analysis_utc"], s["status"], s["message"]) for s in summaries if s["status"] not in ("degraded", "no_data")]
    assert all(all(text in s["message"] for text in SUBSTITUTED) for s in summaries)


def check_re_analysed_from_a_checkpoint(summaries: list[dict]) -> None:
    """Each cycle re-analyses from a checkpoint before the day's late lab values (once there is one)."""
    assert all("re-analysed from" in s["message"] for s in summaries), \
        [s["analysis_utc"] for s in summaries if "re-analysed from" not in s["message"]]


def check_a_late_lab_result_changes_the_analysis(run: Onboarded, day: dt.date) -> None:
    """Leaving out the readings that arrived late (stamped before the newest checkpoint) changes the analysis."""
    given = run.inputs[day]
    newest = (local_midnight(day - dt.timedelta(days=1)) - dt.datetime(1970, 1, 1, tzinfo=dt.UTC)) / dt.timedelta(days=1)
    late = given.observations.time_d <= newest  # stamped before the newest checkpoint: arrived late
    assert late.any() and given.start_d < newest, day
    without = dataclasses.replace(given, observations=given.observations.select(~late))
    a = Checkpoint.from_bytes(cycle.compute(given).checkpoint).ensemble
    b = Checkpoint.from_bytes(cycle.compute(without).checkpoint).ensemble
    assert not np.allclose(a, b), day


def check_forecast_water_temperature_within_recent_range(run: Onboarded, day: dt.date) -> None:
    """Every scenario's water temperature within the last two weeks' observed range, widened by ±2 °C.

    The widening covers the scenarios' spread (±1.5 °C); a drift to a constant (the old 15 °C) fails it.
    """
    analysis = local_midnight(day)
    recent = readings_frame(run.engine, variables=["water_temperature"], start=analysis - dt.timedelta(days=14),
                            end=analysis).value
    assert len(recent) > 0, day
    low, high = recent.min(), recent.max()
    for scenario in run.inputs[day].forecast_drivers:
        temps = np.asarray(scenario.water_temperature_C)
        assert temps.min() >= low - 2.0 and temps.max() <= high + 2.0, (day, low, high, temps.min(), temps.max())
