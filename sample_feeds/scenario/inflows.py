"""Daily inflow gauges (discharge, nitrate, SRP, temperature) and their 15-minute forcing."""
from __future__ import annotations

import numpy as np
import pandas as pd

from .randomness import ar1
from .setting import GAUGES


def make_inflows(rng: np.random.Generator, storms, n_days: int, air_daily: np.ndarray) -> pd.DataFrame:
    """Daily discharge [m³/s], nitrate [mg N/L], SRP [µg P/L] and temperature [°C] at the three gauges.

    Baseflow recession Q = Q_end + (Q_start - Q_end) exp(-t/tau), storm
    hydrographs (one-day rise, ~3-day recession) and a first-flush nutrient
    pulse with each storm; autumn recharge lifts the baseflow again. Inflow
    temperature follows the daily mean air temperature ``air_daily`` [°C].
    Columns: day (since season start), gauge, discharge_m3s, nitrate_mgL, srp_ugL, temp_c.
    """
    day = np.arange(n_days, dtype=float)
    params = {   # q_start, q_end, tau, storm peak, nitrate base (May, Aug) [mg/L], SRP base [µg/L]
        "FB-GAUGE": (1.3, 0.22, 35.0, 4.5, (3.2, 0.7), 28.0),
        "TB-GAUGE": (1.6, 0.40, 40.0, 4.0, (0.9, 0.45), 7.0),
        "SC-GAUGE": (0.30, 0.07, 35.0, 0.9, (0.35, 0.15), 5.0),
    }
    storm_q = np.zeros(n_days)
    for d0, mag in storms:
        dt = day - np.floor(d0)
        storm_q += mag * np.where(dt >= 0, np.exp(-dt / 3.0), 0.0)
    autumn = 1.0 / (1.0 + np.exp(-(day - 150.0) / 8.0))
    rows = []
    for g, (q0, q1, tau, peak, (n_may, n_aug), srp0) in params.items():
        noise = np.exp(ar1(rng, n_days, 0.8, 0.08))
        base = (q1 + (q0 - q1) * np.exp(-day / tau)) * (1.0 + 1.2 * autumn)
        q = (base + peak * storm_q * rng.uniform(0.8, 1.2)) * noise
        season = 0.5 * (1 + np.cos(2 * np.pi * (day - 105.0) / 230.0))  # 1 near Aug, 0 in spring
        nitrate = (n_may + (n_aug - n_may) * season) * (1.0 + 0.5 * np.tanh(storm_q))
        nitrate *= np.exp(rng.normal(0, 0.06, n_days))
        srp = srp0 * (1.0 + 2.5 * storm_q) * np.exp(rng.normal(0, 0.12, n_days))
        rows.append(pd.DataFrame({"day": day.astype(int), "gauge": g, "discharge_m3s": q,
                                  "nitrate_mgL": nitrate, "srp_ugL": srp,
                                  "temp_c": 2.0 + 0.8 * air_daily}))
    return pd.concat(rows, ignore_index=True)


def inflows_at_steps(inflows: pd.DataFrame, season_day: np.ndarray) -> dict[str, np.ndarray]:
    """Model forcing per step and gauge, interpolated linearly between mid-day values.

    ``season_day`` [d since season start] gives the step times. Returns arrays of
    shape (steps, gauges): ``q`` [m³/s], ``nitrate`` [µg N/L], ``srp`` [µg P/L], ``temp`` [°C].
    """
    mid = np.arange(inflows["day"].max() + 1) + 0.5
    forcing = {}
    for key, col, scale in (("q", "discharge_m3s", 1.0), ("nitrate", "nitrate_mgL", 1000.0),
                            ("srp", "srp_ugL", 1.0), ("temp", "temp_c", 1.0)):
        forcing[key] = np.stack([np.interp(season_day, mid, inflows.loc[inflows["gauge"] == g, col].to_numpy() * scale)
                                 for g in GAUGES], axis=1)
    return forcing
