"""Observed crossings of an alert level and how long the warning was in force before each.

The inputs are daily and aligned on one contiguous grid of issue days:
``days_d`` (T,) [epoch days] stepping by exactly one day, ``fired`` (T,) the
state of the alert rule for the level after the cycle issued that day (True
while the level is in force), ``observed`` (T,) the daily observed value
(e.g. daily mean phycocyanin [µg/L]; NaN on days without one).

Definitions (Bloomline's, stated here once):

* A **crossing** is a day whose observed value is at or above the threshold
  while the ``min_days_below`` days before it hold no observed value at or
  above it and at least one below it (days without an observation do not
  break the spell, but a spell with no observation at all is no evidence
  that the water was below). ``MIN_DAYS_BELOW`` = 7: a week below separates
  two episodes (Bloomline's choice, not a published standard).
* The **season** of a day is the calendar year in which the season holding
  it starts (``season_start_month`` = 1: calendar years; 7 for a southern
  hemisphere July–June season). By default only each season's first
  crossing is kept: the onset of the season's first episode at that level.
* The **warning lead** of a crossing on day t is the number of consecutive
  days ending on day t − 1 on which the rule was in force (the warning
  stood that many days before the water was observed at the level; counted
  within the series, so a warning standing since the first day gives a
  lower bound). When the rule was not in force on day t − 1 the crossing was
  **missed**: the lead is 0 when the rule fired on day t itself, −d when it
  first fired d days after t, and NaN when it never fired afterwards within
  the series.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

MIN_DAYS_BELOW = 7


@dataclass(frozen=True)
class WarningLeads:
    """Crossings and their warning leads, one entry per crossing.

    ``index`` (K,) position in the input arrays; ``day_d`` (K,) [epoch days];
    ``season`` (K,) season label (year); ``lead_days`` (K,) [d], see the
    module docstring (> 0 warned, <= 0 or NaN missed).
    """

    index: np.ndarray
    day_d: np.ndarray
    season: np.ndarray
    lead_days: np.ndarray

    @property
    def warned(self) -> np.ndarray:
        """(K,) True where the warning stood at least one day before the crossing."""
        return np.nan_to_num(self.lead_days, nan=0.0) > 0


def _grid(days_d):
    days_d = np.asarray(days_d, dtype=float)
    if days_d.ndim != 1 or days_d.size == 0:
        raise ValueError(f"days_d must be a non-empty 1-D array of epoch days, got shape {days_d.shape}")
    if days_d.size > 1 and not np.allclose(np.diff(days_d), 1.0, rtol=0.0, atol=1e-9):
        raise ValueError("days_d must be a contiguous daily grid (steps of exactly 1 day); put missing days in as NaN")
    return days_d


def season_of(days_d, season_start_month: int = 1) -> np.ndarray:
    """Season label (int year the season starts in) of each epoch day (T,)."""
    if int(season_start_month) != season_start_month or not 1 <= season_start_month <= 12:
        raise ValueError(f"season_start_month must be 1..12, got {season_start_month!r}")
    dates = np.floor(np.asarray(days_d, dtype=float)).astype("int64").astype("datetime64[D]")
    months = dates.astype("datetime64[M]") - np.timedelta64(int(season_start_month) - 1, "M")
    return months.astype("datetime64[Y]").astype("int64") + 1970


def crossing_indices(days_d, observed, threshold: float, *, min_days_below: int = MIN_DAYS_BELOW,
                     season_start_month: int = 1, first_per_season: bool = True) -> np.ndarray:
    """Positions (K,) of the crossings of ``threshold`` [unit of ``observed``].

    See the module docstring for the definition; ``first_per_season=False``
    keeps every crossing (each the start of a new episode).
    """
    days_d = _grid(days_d)
    observed = np.asarray(observed, dtype=float)
    if observed.shape != days_d.shape:
        raise ValueError(f"observed must match days_d {days_d.shape}, got {observed.shape}")
    if not np.isfinite(threshold):
        raise ValueError(f"threshold must be a finite number, got {threshold!r}")
    if int(min_days_below) != min_days_below or min_days_below < 1:
        raise ValueError(f"min_days_below must be a whole number >= 1, got {min_days_below!r}")
    n = int(min_days_below)
    seen = np.isfinite(observed)
    above = seen & (observed >= threshold)
    below = seen & (observed < threshold)
    # counts over the n days before each day, from cumulative sums
    c_above = np.concatenate(([0], np.cumsum(above)))
    c_below = np.concatenate(([0], np.cumsum(below)))
    i = np.arange(n, days_d.size)
    ok = above[i] & (c_above[i] - c_above[i - n] == 0) & (c_below[i] - c_below[i - n] > 0)
    found = i[ok]
    if first_per_season and found.size:
        seasons = season_of(days_d[found], season_start_month)
        _, first = np.unique(seasons, return_index=True)
        found = found[np.sort(first)]
    return found


def lead_days(fired, index: int) -> float:
    """Warning lead [d] of a crossing at position ``index`` of the rule states ``fired`` (T,).

    See the module docstring: the run of days in force ending the day before,
    else 0 (fired that day), −d (fired d days later) or NaN (never fired).
    """
    fired = _states(fired)
    if not 0 <= index < fired.size:
        raise ValueError(f"index must lie in 0..{fired.size - 1}, got {index}")
    before = fired[:index][::-1]
    run = int(np.argmin(before)) if not before.all() else before.size
    if run > 0:
        return float(run)
    later = np.flatnonzero(fired[index:])
    return -float(later[0]) if later.size else float("nan")


def _states(fired):
    fired = np.asarray(fired)
    if fired.ndim != 1:
        raise ValueError(f"fired must be a 1-D array of rule states, got shape {fired.shape}")
    if fired.dtype != bool:
        if np.any(~np.isin(fired, (0, 1))):
            raise ValueError("fired must hold booleans or 0/1")
        fired = fired.astype(bool)
    return fired


def warning_leads(days_d, fired, observed, threshold: float, *, min_days_below: int = MIN_DAYS_BELOW,
                  season_start_month: int = 1, first_per_season: bool = True) -> WarningLeads:
    """Crossings of ``threshold`` in ``observed`` and the warning lead of ``fired`` before each."""
    days_d = _grid(days_d)
    fired = _states(fired)
    if fired.shape != days_d.shape:
        raise ValueError(f"fired must match days_d {days_d.shape}, got {fired.shape}")
    idx = crossing_indices(days_d, observed, threshold, min_days_below=min_days_below,
                           season_start_month=season_start_month, first_per_season=first_per_season)
    return WarningLeads(
        index=idx,
        day_d=days_d[idx],
        season=season_of(days_d[idx], season_start_month),
        lead_days=np.array([lead_days(fired, int(k)) for k in idx], dtype=float),
    )
