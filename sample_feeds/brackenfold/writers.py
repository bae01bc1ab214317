"""Write the export files (one long CSV per year) and the truth files.

All files are CSV with ``\\n`` line ends and fixed number formats, so a seed
writes the same bytes every time.
"""
from __future__ import annotations

import csv
from pathlib import Path

import pandas as pd

EXPORT_HEADER = ("time", "site", "variable", "value", "unit")
TRUTH_DECIMALS = 4


def export_name(year: int) -> str:
    """File name of one year's export."""
    return f"brackenfold_{year}.csv"


def write_export(out_dir: Path, year: int, rows: list[tuple]) -> Path:
    """``<out_dir>/brackenfold_<year>.csv``: long rows time, site, variable, value, unit."""
    out_dir.mkdir(parents=True, exist_ok=True)
    path = out_dir / export_name(year)
    with path.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(EXPORT_HEADER)
        writer.writerows(rows)
    return path


def write_truth(out_dir: Path, daily: pd.DataFrame, events: list[dict]) -> None:
    """``<out_dir>/truth/daily.csv`` (daily truth, 4 decimals) and ``truth/events.csv``."""
    folder = out_dir / "truth"
    folder.mkdir(parents=True, exist_ok=True)
    daily.to_csv(folder / "daily.csv", index=False, lineterminator="\n", float_format=f"%.{TRUTH_DECIMALS}f")
    pd.DataFrame(events, columns=["season", "kind", "date", "detail"]).to_csv(
        folder / "events.csv", index=False, lineterminator="\n")
