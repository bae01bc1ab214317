"""One season of the scenario, end to end: draw, run the truth, observe, write, summarise."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from .buoy_files import write_buoys
from .formatting import event_row
from .inflows import inflows_at_steps, make_inflows
from .lab import make_lab
from .randomness import child_rngs
from .sensors import SENSORS, make_buoy_series
from .setting import (
    LOCAL_OFFSET,
    SEASON_END_LOCAL,
    SEASON_START_LOCAL,
    STEP_MIN,
    STEPS_PER_DAY,
)
from .summary import daily_truth, plot_season, summary_text
from .truth import run_truth
from .weather import make_forecasts, make_weather, storm_days, weather_at_steps
from .writers import (
    write_forecasts,
    write_inflows,
    write_lab,
    write_truth,
    write_weather,
)


def generate(seed: int, out_dir: Path, plot: Path | None = None) -> str:
    """Write the whole scenario for ``seed`` under ``out_dir``; returns the season summary text.

    Each component draws from its own child generator of ``seed``, so the same
    seed writes the same bytes. ``plot``, if given, is the path of a PNG overview.
    """
    rng_storm, rng_weather, rng_fc, rng_inflow, rng_buoy, rng_lab = child_rngs(seed, 6)
    local = pd.date_range(SEASON_START_LOCAL, SEASON_END_LOCAL, freq=f"{STEP_MIN}min")
    n_days = len(local) // STEPS_PER_DAY
    t0_utc = SEASON_START_LOCAL - LOCAL_OFFSET
    n_hours = (n_days + 8) * 24          # the last 7-day forecasts reach past the season end

    storms = storm_days(rng_storm)
    weather = make_weather(rng_weather, storms, n_hours, t0_utc)
    w15 = weather_at_steps(weather, len(local))
    air_daily = np.array([w15["air"][d * STEPS_PER_DAY:(d + 1) * STEPS_PER_DAY].mean() for d in range(n_days)])
    inflows = make_inflows(rng_inflow, storms, n_days, air_daily)
    season_day = np.arange(len(local)) / STEPS_PER_DAY
    truth = run_truth(w15, inflows_at_steps(inflows, season_day), season_day)

    events: list = []
    buoy_rngs = rng_buoy.spawn(len(SENSORS))
    series = {s.site: make_buoy_series(r, s, b, truth, local, w15["sw"], w15["wind"], events)
              for b, (s, r) in enumerate(zip(SENSORS, buoy_rngs))}
    write_buoys(out_dir, series, events)
    write_lab(out_dir, make_lab(rng_lab, truth, local))

    dates = pd.date_range(SEASON_START_LOCAL, periods=n_days, freq="D").strftime("%Y-%m-%d").to_numpy()
    write_inflows(out_dir, inflows, dates)
    observed = weather.iloc[: n_days * 24]
    write_weather(out_dir, observed)
    issues = pd.date_range("2026-05-01 00:00", "2026-10-31 00:00", freq="D")
    write_forecasts(out_dir, make_forecasts(rng_fc, weather, issues))

    daily = daily_truth(truth, local)
    for d0, mag in storms:
        t = SEASON_START_LOCAL + pd.Timedelta(days=d0)
        events.append(event_row("storm", "MET-01", t, t + pd.Timedelta(days=2), f"magnitude {mag:.2f}"))
    write_truth(out_dir, daily, events)

    if plot is not None:
        inflows["date"] = dates[inflows["day"].to_numpy()]
        plot_season(plot, daily, observed, inflows)
    return summary_text(daily)
