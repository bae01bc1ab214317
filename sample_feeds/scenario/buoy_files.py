"""Write the buoy files, buoys/<SITE>/<YYYY-MM>.csv, with their file-level quirks.

Quirks added here (listed in truth/events.csv): exact duplicate rows re-sent
by the logger, and one malformed file with a damaged block of rows.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from .formatting import LOCAL_MINUTES, event_row, fixed_decimals
from .sensors import PC_RFU_A, PC_RFU_B, RFU_SITE

MALFORMED_FILE = ("CR-DB", "2026-07")
MALFORMED_START = pd.Timestamp("2026-07-14 08:00")
DUPLICATES = {  # (site, month): (first timestamp of a re-sent block, rows re-sent)
    ("CR-FA", "2026-08"): ("2026-08-12 06:00", 4),
    ("SL-01", "2026-06"): ("2026-06-20 14:15", 1),
    ("CR-MR", "2026-10"): ("2026-10-07 22:30", 2),
}


def write_buoys(out_dir: Path, series: dict, events: list) -> None:
    """Write buoys/<SITE>/<YYYY-MM>.csv with duplicates and one malformed file.

    ``series`` maps site to the frame of ``sensors.make_buoy_series``; only rows
    marked ``present`` are written. SL-01 phycocyanin is written in RFU.
    """
    for site, df in series.items():
        df = df[df["present"]].copy()
        if site == RFU_SITE:
            header = "timestamp,chl_fluor,pc_rfu,temp"
            pc_text = fixed_decimals((df["pc"].to_numpy() - PC_RFU_B) / PC_RFU_A, 3)
        else:
            header = "timestamp,chl_fluor,pc_fluor,temp"
            pc_text = fixed_decimals(df["pc"].to_numpy(), 2)
        ts_text = df["timestamp"].dt.strftime(LOCAL_MINUTES).to_numpy()
        lines = np.array([",".join(r) for r in zip(ts_text, fixed_decimals(df["chl_fluor"].to_numpy(), 2),
                                                   pc_text, fixed_decimals(df["temp"].to_numpy(), 2))],
                         dtype=object)
        months = df["timestamp"].dt.strftime("%Y-%m").to_numpy()
        site_dir = out_dir / "buoys" / site
        site_dir.mkdir(parents=True, exist_ok=True)
        for month in np.unique(months):
            rows = list(lines[months == month])
            rows = _inject_duplicates(site, month, rows, events)
            if (site, month) == MALFORMED_FILE:
                rows = _garble(rows, header, events)
            (site_dir / f"{month}.csv").write_text(header + "\n" + "\n".join(rows) + "\n")


def _inject_duplicates(site: str, month: str, rows: list[str], events: list) -> list[str]:
    """Re-send a block of rows right after itself, as a logger retrying an upload does."""
    if (site, month) not in DUPLICATES:
        return rows
    first, count = DUPLICATES[(site, month)]
    k = next(i for i, r in enumerate(rows) if r.startswith(first))
    block = rows[k:k + count]
    events.append({"kind": "duplicates", "site": site, "start_local": first,
                   "end_local": block[-1][:16], "detail": f"{count} rows written twice"})
    return rows[:k + count] + block + rows[k + count:]


def _garble(rows: list[str], header: str, events: list) -> list[str]:
    """Damage a block of rows the way a failing logger upload does."""
    k = next(i for i, r in enumerate(rows) if r.startswith(MALFORMED_START.strftime(LOCAL_MINUTES)))
    rows = list(rows)

    def fields(i):
        return rows[i].split(",")

    f = fields(k + 1); rows[k + 1] = ",".join(f + ["1"])                      # extra column
    f = fields(k + 3); rows[k + 3] = ",".join([f[0], f[1], f[3]])             # missing column
    f = fields(k + 4); rows[k + 4] = ",".join([f[0], "ERR", f[2], f[3]])      # non-numeric
    f = fields(k + 6); rows[k + 6] = ",".join([f[0], f[1], "#N/A", f[3]])     # non-numeric
    f = fields(k + 7); rows[k + 7] = ",".join(["2026-07-14 24:45"] + f[1:])   # impossible time
    f = fields(k + 9); rows[k + 9] = ",".join(["14/07/2026 10:15"] + f[1:])   # wrong format
    rows[k + 11] = rows[k + 11][:19]                                          # truncated line
    f = fields(k + 13); rows[k + 13] = ",".join([f[0], f[1] + "." + "5", f[2], f[3]])  # "3.41.5"
    rows.insert(k + 15, header)                                               # repeated header
    rows.insert(k + 16, ",,,")                                                # empty record
    events.append(event_row("malformed", MALFORMED_FILE[0], MALFORMED_START,
                            MALFORMED_START + pd.Timedelta(minutes=15 * 15),
                            "9 damaged rows + repeated header + empty record in buoys/CR-DB/2026-07.csv"))
    return rows
