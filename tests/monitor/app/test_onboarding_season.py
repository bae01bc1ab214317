"""Onboarding over a whole season: daily cycles at Tallowmere Pond (invented, ``sample_feeds/onboarding/``)
from the first to the last day of its monitoring season (1 April to 31 October), the lab reporting three
days late as in the June test (``test_onboarding.py``, which shares the run and the checks).

Checked on every day of the season: no cycle fails; every run names the substituted drivers; every row is
accounted for and none rejected for an annotated unit or a declared variable; the forecast water
temperature stays within the recent observed range (spring warming and autumn cooling included); late
lab results change the next analysis (one day a month); the published total chlorophyll-a is finite and
within a plausible range.
"""

from __future__ import annotations

import datetime as dt
import math

import pytest

from monitor.store.readings import readings_frame
from monitor.store.status import run_values
from tests.monitor.app.onboarding_run import (
    ARRIVAL_DAYS,
    check_a_late_lab_result_changes_the_analysis,
    check_every_row_accounted_for,
    check_every_run_names_the_substituted_drivers,
    check_forecast_water_temperature_within_recent_range,
    check_re_analysed_from_a_checkpoint,
    run_days,
)

pytestmark = pytest.mark.slow

FIRST, LAST = dt.date(2026, 4, 1), dt.date(2026, 10, 31)  # the pond's season, as its bloomline.toml declares
# Upper bound of a plausible lake chlorophyll-a: ten times the highest value the lab reported so far. The OECD
# (1982) trophic classes put a hypertrophic lake's annual peak above 75 ug/L; a forecast an order of magnitude
# beyond anything observed at the lake is a blow-up, not a bloom (common practice for a sanity bound).
PLAUSIBLE_FACTOR = 10.0


@pytest.fixture(scope="module")
def season(tmp_path_factory):
    out = run_days(tmp_path_factory.mktemp("tallowmere-season"), FIRST, LAST)
    yield out
    out.close()


def test_no_cycle_fails_and_every_run_names_the_substituted_drivers(season):
    summaries = season.summaries
    assert len(summaries) == (LAST - FIRST).days + 1
    assert not [s for s in summaries if s["status"] == "failed"]
    check_every_run_names_the_substituted_drivers(summaries)
    # nothing to analyse until the lab's first values arrive; from then on every cycle runs and publishes
    first_data = next(i for i, s in enumerate(summaries) if s["status"] != "no_data")
    assert first_data <= ARRIVAL_DAYS
    assert all(s["status"] == "degraded" and s["run_id"] is not None for s in summaries[first_data:])
    # one cold start, on the first day (no checkpoint yet); the season's runs resume from then on
    assert ["cold start" in s["message"] for s in summaries].count(True) == 1 and "cold start" in summaries[0]["message"]
    check_re_analysed_from_a_checkpoint(summaries[first_data + ARRIVAL_DAYS:])


def test_every_row_is_accounted_for_over_the_season(season):
    check_every_row_accounted_for(season)
    assert max(dt.date.fromisoformat(r[0]) for r in season.sent) == LAST - dt.timedelta(days=ARRIVAL_DAYS)


def test_the_forecast_water_temperature_stays_within_the_recent_range_all_season(season):
    days = [d for d in season.inputs if d >= FIRST + dt.timedelta(days=ARRIVAL_DAYS + 1)]
    assert len(days) > 200
    for day in days:
        check_forecast_water_temperature_within_recent_range(season, day)


def test_late_lab_results_change_the_next_analysis_every_month(season):
    for month in range(4, 11):
        check_a_late_lab_result_changes_the_analysis(season, dt.date(2026, month, 20))


def test_the_published_total_chlorophyll_is_finite_and_plausible(season):
    chl = readings_frame(season.engine, variables=["chlorophyll_a"])
    published = [s for s in season.summaries if s["run_id"] is not None]
    assert len(published) > 200
    for s in published:
        analysis = dt.datetime.fromisoformat(s["analysis_utc"])
        seen = chl[chl.time_utc <= analysis].value
        # before the lab's first value (the first days' runs start from the default first guess) only finite
        bound = PLAUSIBLE_FACTOR * float(seen.max()) if len(seen) else math.inf
        values = run_values(season.engine, s["run_id"], quantity="total_chlorophyll")
        assert values, s
        for v in values:
            assert math.isfinite(v["value"]), (s["analysis_utc"], v)
            if v["statistic"].startswith("p_"):  # exceedance probabilities
                assert 0.0 <= v["value"] <= 1.0, (s["analysis_utc"], v)
            else:  # mean and quantiles [ug/L]
                assert 0.0 <= v["value"] <= bound, (s["analysis_utc"], v, bound)
