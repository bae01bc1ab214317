"""What the monitoring of Brackenfold Mere records: daily lab chlorophyll-a, a daily-mean
temperature logger and weekly nutrients, each with its own error.

Rows are long-format text as the lab's export writes them: local time, site,
variable, value (text, ``<DL`` below a detection limit) and unit.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from .setting import SITE
from .truth import diagnostics

CHL_ERROR_LOG_SD = 0.12          # [-] lognormal analytical error of extracted chlorophyll-a
TEMPERATURE_ERROR_C = 0.05       # [°C] logger error of a daily mean
NITRATE_ERROR_LOG_SD = 0.05      # [-]
SRP_ERROR_LOG_SD = 0.10          # [-] plus an additive error …
SRP_ERROR_UGL = 0.3              # [µg P/L]
TP_ERROR_LOG_SD = 0.08           # [-]
DETECTION_LIMIT = {"nitrate": 5.0, "srp": 2.0, "total_phosphorus": 5.0}   # [µg/L]
UNITS = {"chlorophyll_a": "ug/L", "water_temperature": "degC", "nitrate": "ug/L N",
         "srp": "ug/L P", "total_phosphorus": "ug/L P"}
DECIMALS = {"chlorophyll_a": 1, "water_temperature": 2, "nitrate": 0, "srp": 1, "total_phosphorus": 0}
NUTRIENT_WEEKDAY = 1             # nutrients on Tuesdays (Monday = 0)
MISSED_VISITS = (3, 7)           # [min, max) number of days without a chlorophyll sample
LOGGER_GAP_DAYS = (1, 4)         # [min, max) days the temperature logger was out, once a season
DAILY_MEAN_STAMP = "12:00"       # the logger export stamps each daily mean at local noon


def value_text(variable: str, value: float) -> str:
    """A lab value as written: fixed decimals per variable, ``<DL`` below the detection limit."""
    limit = DETECTION_LIMIT.get(variable)
    if limit is not None and value < limit:
        return f"<{limit:g}"
    return f"{value:.{DECIMALS[variable]}f}"


def state_at(states: np.ndarray, start: pd.Timestamp, when: pd.Timestamp) -> np.ndarray:
    """The truth state at local time ``when``, linear between the hourly states from ``start``."""
    hours = (when - start) / pd.Timedelta(hours=1)
    k = min(int(np.floor(hours)), len(states) - 2)
    w = hours - k
    return (1.0 - w) * states[k] + w * states[k + 1]


def observe(rng: np.random.Generator, forcing: pd.DataFrame, states: np.ndarray) -> tuple[list[tuple], list[dict]]:
    """Rows of one season's export and the quirk events (missed visits, the logger gap).

    forcing: the season's daily forcing (``forcing.make_forcing``); states: the
    hourly truth (``truth.run_truth``) from local midnight of its first day.
    Returns (rows of (time, site, variable, value text, unit), events).
    """
    days = pd.DatetimeIndex(forcing["date"])
    start = days[0]
    n = len(days)
    weekly = days.weekday == NUTRIENT_WEEKDAY
    others = np.flatnonzero(~weekly[1:]) + 1
    missed = set(rng.choice(others, size=int(rng.integers(*MISSED_VISITS)), replace=False).tolist())
    gap_len = int(rng.integers(*LOGGER_GAP_DAYS))
    gap_start = int(rng.integers(5, n - 5 - gap_len))
    gap = set(range(gap_start, gap_start + gap_len))
    events = [{"kind": "missed_sample", "date": f"{days[d]:%Y-%m-%d}", "detail": "no chlorophyll-a sample that day"}
              for d in sorted(missed)]
    events.append({"kind": "logger_gap", "date": f"{days[gap_start]:%Y-%m-%d}",
                   "detail": f"no water temperature for {gap_len} day(s)"})

    rows: list[tuple] = []
    for d, day in enumerate(days):
        if d not in missed:
            when = day + pd.Timedelta(hours=9) + pd.Timedelta(minutes=5 * int(rng.integers(0, 16)))
            state = state_at(states, start, when)
            diag = diagnostics(state)
            stamp = f"{when:%Y-%m-%d %H:%M}"
            chl = float(diag["chl_a"][0]) * np.exp(rng.normal(0.0, CHL_ERROR_LOG_SD))
            rows.append((stamp, SITE, "chlorophyll_a", value_text("chlorophyll_a", chl), UNITS["chlorophyll_a"]))
            if weekly[d]:
                nitrate = state[0] * np.exp(rng.normal(0.0, NITRATE_ERROR_LOG_SD))
                srp = max(state[1] * np.exp(rng.normal(0.0, SRP_ERROR_LOG_SD)) + rng.normal(0.0, SRP_ERROR_UGL), 0.0)
                tp = float(diag["total_phosphorus"][0]) * np.exp(rng.normal(0.0, TP_ERROR_LOG_SD))
                for variable, value in (("nitrate", nitrate), ("srp", srp), ("total_phosphorus", tp)):
                    rows.append((stamp, SITE, variable, value_text(variable, value), UNITS[variable]))
        if d not in gap:
            temp = forcing["water_temp_c"].iloc[d] + rng.normal(0.0, TEMPERATURE_ERROR_C)
            rows.append((f"{day:%Y-%m-%d} {DAILY_MEAN_STAMP}", SITE, "water_temperature",
                         value_text("water_temperature", temp), UNITS["water_temperature"]))
    return rows, events
