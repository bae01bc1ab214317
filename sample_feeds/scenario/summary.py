"""Daily means of the truth, the printed season summary and the optional overview plot."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from .setting import BASINS
from .truth import CHL_TO_P


def daily_truth(truth: dict, local: pd.DatetimeIndex) -> pd.DataFrame:
    """Daily means of the truth per basin and local day (the rows of truth/daily.csv).

    Columns: date, water_body, basin, site, water_temp_c [°C], nitrate_ugL [µg N/L],
    srp_ugL and total_phosphorus_ugL [µg P/L], chl_* [µg/L chlorophyll-a].
    """
    frames = []
    date = local.strftime("%Y-%m-%d")
    for b, basin in enumerate(BASINS):
        a = truth["algae"][:, b, :]
        tp = truth["srp"][:, b] + CHL_TO_P * a.sum(axis=1) + truth["det_p"][:, b]
        df = pd.DataFrame({"date": date, "water_temp_c": truth["temp"][:, b],
                           "nitrate_ugL": truth["nitrate"][:, b], "srp_ugL": truth["srp"][:, b],
                           "total_phosphorus_ugL": tp, "chl_diatoms_ugL": a[:, 0],
                           "chl_greens_ugL": a[:, 1], "chl_cyanobacteria_ugL": a[:, 2],
                           "chl_total_ugL": a.sum(axis=1)})
        d = df.groupby("date", sort=True).mean().reset_index()
        d.insert(1, "water_body", basin.water_body)
        d.insert(2, "basin", basin.basin)
        d.insert(3, "site", basin.site)
        frames.append(d)
    return pd.concat(frames, ignore_index=True)


def summary_text(daily: pd.DataFrame) -> str:
    """The season summary the script prints: level crossings, peaks, largest daily rise."""
    lines = ["Bloomline demo season 2026-05-01 .. 2026-10-31 (truth, daily means, local dates)",
             (f"{'basin':26s} {'>1':>6s} {'>10':>6s} {'>50':>6s}  {'peak cyano':>10s} {'on':>6s}"
              f"  {'max rise/d':>10s}  {'max tot chl':>11s}")]
    for (wb, basin), d in daily.groupby(["water_body", "basin"], sort=False):
        c = d["chl_cyanobacteria_ugL"].to_numpy()
        dates = d["date"].to_numpy()

        def first(level, c=c, dates=dates):
            """Month-day of the first day above level, or "-"."""
            k = np.flatnonzero(c > level)
            return dates[k[0]][5:] if k.size else "-"
        growth = np.max(np.expm1(np.diff(np.log(c)))) * 100      # largest day-to-day rise
        kp = int(np.argmax(c))
        lines.append(f"{wb + '/' + basin:26s} {first(1):>6s} {first(10):>6s} {first(50):>6s}  "
                     f"{c[kp]:10.1f} {dates[kp][5:]:>6s}  {growth:8.1f} %  {d['chl_total_ugL'].max():11.1f}")
    sl = daily[daily["water_body"] == "sorrel-lake"]
    lines.append(f"sorrel-lake: max cyanobacteria chl {sl['chl_cyanobacteria_ugL'].max():.2f} ug/L, "
                 f"max total chl {sl['chl_total_ugL'].max():.2f} ug/L (daily means)")
    res = daily[daily["water_body"] == "corrisdale"]
    early = res[res["date"] < "2026-07-01"]
    lines.append(f"corrisdale before July: total chl {early['chl_total_ugL'].min():.1f}.."
                 f"{early['chl_total_ugL'].max():.1f} ug/L; water temp max "
                 + ", ".join(f"{b} {g['water_temp_c'].max():.1f}" for b, g in res.groupby("basin", sort=False)) + " C")
    return "\n".join(lines)


def plot_season(path: Path, daily: pd.DataFrame, weather: pd.DataFrame, inflows: pd.DataFrame) -> None:
    """Write a PNG overview of the season to ``path`` (needs matplotlib)."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    fig, ax = plt.subplots(5, 1, figsize=(12, 16), sharex=True)
    for (_wb, basin), d in daily.groupby(["water_body", "basin"], sort=False):
        t = pd.to_datetime(d["date"])
        ax[0].semilogy(t, d["chl_cyanobacteria_ugL"], label=basin)
        ax[1].plot(t, d["chl_total_ugL"], label=f"{basin} total")
        ax[2].plot(t, d["water_temp_c"], label=basin)
        ax[3].semilogy(t, d["nitrate_ugL"], label=f"{basin} N")
        ax[3].semilogy(t, d["srp_ugL"], "--", label=f"{basin} SRP")
    for lvl in (1, 10, 50):
        ax[0].axhline(lvl, color="grey", lw=0.5)
    ax[0].set_ylabel("cyano chl ug/L")
    ax[1].set_ylabel("total chl ug/L")
    ax[2].set_ylabel("water temp C")
    ax[3].set_ylabel("N, SRP ug/L")
    w = weather.set_index("time_utc").resample("D").mean()
    ax[4].plot(w.index, w["air_temp_c"], label="air C")
    ax[4].plot(w.index, w["wind_ms"], label="wind m/s")
    ax[4].plot(w.index, w["shortwave_wm2"] / 20, label="SW/20")
    for g, d in inflows.groupby("gauge"):
        ax[4].plot(pd.to_datetime(d["date"]), d["discharge_m3s"], ":", label=g)
    for a in ax:
        a.legend(fontsize=7, ncol=4)
        a.grid(alpha=0.3)
    fig.tight_layout()
    fig.savefig(path, dpi=80)

