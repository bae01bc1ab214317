"""Observed crossings of an alert level and warning leads on hand-made daily series.

The definitions checked are Bloomline's own (``assimilation.warning_lead``
docstring); every expected value below is counted by hand from the series.
"""
import numpy as np
import pytest

from assimilation import warning_lead as wl

DAY0 = 19_723.0   # 2024-01-01 in epoch days


def _series(n, below=2.0):
    return DAY0 + np.arange(n, dtype=float), np.full(n, below)


def test_a_crossing_needs_the_minimum_spell_below_before_it():
    days, obs = _series(30)
    obs[10:13] = 12.0      # first episode: crossing on day 10
    obs[16] = 11.0         # 3 days below only: same episode, not a crossing
    obs[25:] = 15.0        # days 17..24 below (8 >= 7): a new crossing on day 25
    idx = wl.crossing_indices(days, obs, 10.0, first_per_season=False)
    np.testing.assert_array_equal(idx, [10, 25])
    np.testing.assert_array_equal(wl.crossing_indices(days, obs, 10.0), [10])   # first of the season
    np.testing.assert_array_equal(wl.crossing_indices(days, obs, 10.0, min_days_below=9, first_per_season=False), [10])


def test_a_series_that_starts_above_the_level_has_no_crossing_until_it_has_been_below():
    days, obs = _series(20)
    obs[:5] = 20.0
    obs[15] = 20.0         # the 7 days before day 15 (8..14) are below: the first crossing
    np.testing.assert_array_equal(wl.crossing_indices(days, obs, 10.0), [15])


def test_missing_days_do_not_break_the_spell_but_an_empty_spell_is_no_evidence():
    days, obs = _series(40)
    obs[3:9] = np.nan      # the 7 days before day 9 (2..8) hold one value, below (day 2): a crossing
    obs[9] = 12.0
    obs[20:33] = np.nan    # nothing observed in the 7 days before day 33: no crossing
    obs[33] = 12.0
    np.testing.assert_array_equal(wl.crossing_indices(days, obs, 10.0, first_per_season=False), [9])


def test_the_first_crossing_is_kept_per_season_and_seasons_can_start_in_july():
    days = DAY0 + np.arange(366 + 365, dtype=float)        # 2024 (leap) and 2025
    obs = np.full(days.size, 1.0)
    june_2024, august_2024, june_2025 = 152, 214, 366 + 151   # 2024-06-01, 2024-08-02, 2025-06-01
    for k in (june_2024, august_2024, june_2025):
        obs[k:k + 5] = 30.0
    calendar = wl.crossing_indices(days, obs, 10.0)
    np.testing.assert_array_equal(calendar, [june_2024, june_2025])
    july = wl.crossing_indices(days, obs, 10.0, season_start_month=7)
    # seasons 2023 (to 2024-06-30), 2024 (2024-07 to 2025-06)
    np.testing.assert_array_equal(july, [june_2024, august_2024])
    np.testing.assert_array_equal(wl.season_of(days[july], 7), [2023, 2024])


def test_warning_lead_counts_the_days_in_force_without_a_break_before_the_crossing():
    fired = np.array([0, 1, 0, 1, 1, 1, 0, 0, 0, 0], dtype=bool)
    assert wl.lead_days(fired, 6) == 3.0         # in force on days 3, 4, 5
    assert wl.lead_days(fired, 2) == 1.0
    assert wl.lead_days(fired, 0) == -1.0        # nothing before; fired the day after: missed
    fired_on_the_day = np.array([0, 0, 1, 1], dtype=bool)
    assert wl.lead_days(fired_on_the_day, 2) == 0.0
    assert np.isnan(wl.lead_days(fired, 7))      # never fired after a miss


def test_warning_leads_combines_crossings_and_leads():
    days, obs = _series(40)
    obs[20:25] = 12.0
    fired = np.zeros(40, dtype=bool)
    fired[17:30] = True    # in force from day 17: 3 days before the crossing on day 20
    leads = wl.warning_leads(days, fired, obs, 10.0)
    np.testing.assert_array_equal(leads.index, [20])
    np.testing.assert_array_equal(leads.day_d, [DAY0 + 20])
    np.testing.assert_array_equal(leads.season, [2024])
    np.testing.assert_array_equal(leads.lead_days, [3.0])
    np.testing.assert_array_equal(leads.warned, [True])
    late = wl.warning_leads(days, np.roll(fired, 5), obs, 10.0)   # fires on day 22
    np.testing.assert_array_equal(late.lead_days, [-2.0])
    np.testing.assert_array_equal(late.warned, [False])


def test_warning_lead_rejects_a_grid_with_missing_days_or_bad_states():
    days, obs = _series(10)
    with pytest.raises(ValueError, match="contiguous daily grid"):
        wl.crossing_indices(np.delete(days, 4), np.delete(obs, 4), 10.0)
    with pytest.raises(ValueError, match="fired must hold booleans"):
        wl.warning_leads(days, np.full(10, 2), obs, 10.0)
    with pytest.raises(ValueError, match="season_start_month must be"):
        wl.season_of(days, 13)
