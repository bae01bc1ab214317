"""Daily means of the truth, the clear-water phase in them, and the printed season summary."""
from __future__ import annotations

import numpy as np
import pandas as pd

from .setting import Season
from .truth import K_N, K_P, diagnostics

GRAZING_DROP_WINDOW_D = 10       # [d] window in which a grazing collapse is looked for


def daily_truth(forcing: pd.DataFrame, states: np.ndarray, season: Season) -> pd.DataFrame:
    """One row per local day: the forcing and the means of the 24 hourly truth states of that day.

    Columns and units are those of ``truth/daily.csv`` (see README.md).
    """
    n = len(forcing)
    hourly = states[: 24 * n].reshape(n, 24, -1)
    mean = hourly.mean(axis=1)
    diag = diagnostics(states[: 24 * n])
    per_day = {k: v.reshape(n, 24).mean(axis=1) for k, v in diag.items()}
    return pd.DataFrame({
        "date": pd.DatetimeIndex(forcing["date"]).strftime("%Y-%m-%d"),
        "season": season.year,
        "water_temp_c": forcing["water_temp_c"].to_numpy(),
        "shortwave_wm2": forcing["shortwave_wm2"].to_numpy(),
        "wind_ms": forcing["wind_ms"].to_numpy(),
        "storm": forcing["storm"].to_numpy(),
        "stratified": forcing["stratified"].astype(int).to_numpy(),
        "anoxic_fraction": forcing["anoxic_fraction"].to_numpy(),
        "nitrate_ugL": mean[:, 0],
        "srp_ugL": mean[:, 1],
        "srp_deep_ugL": mean[:, 5],
        "total_phosphorus_ugL": per_day["total_phosphorus"],
        "phyto_carbon_ugL": mean[:, 2],
        "zooplankton_carbon_ugL": mean[:, 3],
        "detritus_carbon_ugL": mean[:, 4],
        "sediment_p_mg_m2": mean[:, 6],
        "chl_to_carbon": mean[:, 7],
        "chl_a_ugL": per_day["chl_a"],
    })


def grazing_collapse(daily: pd.DataFrame, window_d: int = GRAZING_DROP_WINDOW_D) -> tuple[float, int, int]:
    """The largest fall of daily chlorophyll-a within ``window_d`` days while nutrients do not limit.

    "Do not limit" means nitrate ≥ K_N and SRP ≥ K_P (each Monod term ≥ 1/2) on
    every day from the start to the end of the fall. Returns (fraction fallen
    [-], start row, end row); (0, 0, 0) if chlorophyll never falls so.
    """
    chl = daily["chl_a_ugL"].to_numpy()
    ample = ((daily["nitrate_ugL"] >= K_N) & (daily["srp_ugL"] >= K_P)).to_numpy()
    best = (0.0, 0, 0)
    for i in range(len(chl)):
        for j in range(i + 1, min(i + window_d + 1, len(chl))):
            if not ample[j]:
                break
            if ample[i] and 1.0 - chl[j] / chl[i] > best[0]:
                best = (float(1.0 - chl[j] / chl[i]), i, j)
    return best


def summary_text(daily: pd.DataFrame, storms: dict[int, list[tuple[str, float]]]) -> str:
    """The printed summary: per season the chlorophyll peak, the clear-water phase and the storms."""
    lines = ["Brackenfold Mere (truth, daily means, local dates)"]
    for year, part in daily.groupby("season", sort=True):
        part = part.reset_index(drop=True)
        k = int(part["chl_a_ugL"].idxmax())
        drop, i, j = grazing_collapse(part)
        lines.append(
            f"{year}: chl-a peak {part['chl_a_ugL'][k]:.1f} ug/L on {part['date'][k]}; "
            f"clear-water phase {part['chl_a_ugL'][i]:.1f} -> {part['chl_a_ugL'][j]:.1f} ug/L "
            f"({part['date'][i]} .. {part['date'][j]}, -{100 * drop:.0f} %); "
            f"TP {part['total_phosphorus_ugL'].min():.0f}..{part['total_phosphorus_ugL'].max():.0f} ug/L")
        lines.append("      storms: " + ", ".join(f"{d} ({m:.2f})" for d, m in storms[year]))
    return "\n".join(lines)
