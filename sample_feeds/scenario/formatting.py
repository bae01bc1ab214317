"""How numbers, times and quirk events are spelled in the scenario's files."""
from __future__ import annotations

import numpy as np
import pandas as pd

LOCAL_MINUTES = "%Y-%m-%d %H:%M"        # local timestamps in buoy, lab and events files


def fixed_decimals(values: np.ndarray, decimals: int) -> np.ndarray:
    """Values as text with a fixed number of decimals; NaN becomes an empty field."""
    out = np.char.mod(f"%.{decimals}f", np.nan_to_num(values, nan=0.0)).astype(object)
    out[np.isnan(values)] = ""
    return out


def iso_z(times) -> np.ndarray:
    """UTC times as ISO 8601 text with a ``Z`` (``2026-05-01T00:00:00Z``)."""
    return pd.DatetimeIndex(times).strftime("%Y-%m-%dT%H:%M:%SZ").to_numpy()


def event_row(kind: str, site: str, start: pd.Timestamp, end: pd.Timestamp, detail: str) -> dict:
    """One row of truth/events.csv; start and end are local times."""
    return {"kind": kind, "site": site, "start_local": start.strftime(LOCAL_MINUTES),
            "end_local": end.strftime(LOCAL_MINUTES), "detail": detail}
