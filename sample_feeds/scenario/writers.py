"""Write the lab, inflow, weather and truth files (the buoy files are in buoy_files.py).

All files are CSV with ``\\n`` line ends; number formats are fixed per column.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from .formatting import fixed_decimals, iso_z
from .sensors import RFU_SITE, SENSORS


def _csv(frame: pd.DataFrame, path: Path) -> None:
    frame.to_csv(path, index=False, lineterminator="\n")


def write_lab(out_dir: Path, lab: pd.DataFrame) -> None:
    """lab/samples.csv from the rows of ``lab.make_lab``."""
    (out_dir / "lab").mkdir(parents=True, exist_ok=True)
    _csv(lab, out_dir / "lab" / "samples.csv")


def write_inflows(out_dir: Path, inflows: pd.DataFrame, dates: np.ndarray) -> None:
    """inflows/daily.csv: date, gauge, discharge [m³/s], nitrate [mg N/L], SRP [µg P/L].

    ``dates`` holds the local date text of each season day.
    """
    (out_dir / "inflows").mkdir(parents=True, exist_ok=True)
    inf = inflows.sort_values(["day", "gauge"]).reset_index(drop=True)
    _csv(pd.DataFrame({"date": dates[inf["day"].to_numpy()], "gauge": inf["gauge"],
                       "discharge_m3s": fixed_decimals(inf["discharge_m3s"].to_numpy(), 3),
                       "nitrate_mgL": fixed_decimals(inf["nitrate_mgL"].to_numpy(), 3),
                       "srp_ugL": fixed_decimals(inf["srp_ugL"].to_numpy(), 1)}),
         out_dir / "inflows" / "daily.csv")


def write_weather(out_dir: Path, observed: pd.DataFrame) -> None:
    """weather/hourly.csv: UTC time, air temperature [°C], shortwave [W/m²], wind [m/s]."""
    (out_dir / "weather").mkdir(parents=True, exist_ok=True)
    _csv(pd.DataFrame({"time_utc": iso_z(observed["time_utc"]),
                       "air_temp_c": fixed_decimals(observed["air_temp_c"].to_numpy(), 1),
                       "shortwave_wm2": fixed_decimals(observed["shortwave_wm2"].to_numpy(), 0),
                       "wind_ms": fixed_decimals(observed["wind_ms"].to_numpy(), 1)}),
         out_dir / "weather" / "hourly.csv")


def write_forecasts(out_dir: Path, forecasts: pd.DataFrame) -> None:
    """weather/forecasts/<YYYY-MM>.csv, one file per month of issue (UTC)."""
    (out_dir / "weather" / "forecasts").mkdir(parents=True, exist_ok=True)
    month = forecasts["issued_utc"].dt.strftime("%Y-%m").to_numpy()
    text = pd.DataFrame({"issued_utc": iso_z(forecasts["issued_utc"]), "valid_utc": iso_z(forecasts["valid_utc"]),
                         "air_temp_c": fixed_decimals(forecasts["air_temp_c"].to_numpy(), 1),
                         "shortwave_wm2": fixed_decimals(forecasts["shortwave_wm2"].to_numpy(), 0),
                         "wind_ms": fixed_decimals(forecasts["wind_ms"].to_numpy(), 1)})
    for m in np.unique(month):
        _csv(text[month == m], out_dir / "weather" / "forecasts" / f"{m}.csv")


def write_truth(out_dir: Path, daily: pd.DataFrame, events: list) -> None:
    """truth/daily.csv (4 decimals), truth/sensors.csv (buoy gains) and truth/events.csv."""
    (out_dir / "truth").mkdir(parents=True, exist_ok=True)
    _csv(daily.round(4), out_dir / "truth" / "daily.csv")
    _csv(pd.DataFrame([{"site": s.site, "chl_gain": s.chl_gain, "pc_gain": s.pc_gain,
                        "pc_offset_ugL": s.pc_offset_ugL,
                        "pc_unit": "RFU" if s.site == RFU_SITE else "ug/L"} for s in SENSORS]),
         out_dir / "truth" / "sensors.csv")
    _csv(pd.DataFrame(events), out_dir / "truth" / "events.csv")
