"""Reliability-diagram tables and the forecast-versus-observed history of the live record."""

from __future__ import annotations

import numpy as np
import pandas as pd

from assimilation import probability_scores as ps

#: Equal-width probability bins of the reliability diagram (Murphy 1973 binning).
RELIABILITY_BINS = 10


def alert_quantity(records: pd.DataFrame) -> str | None:
    """The quantity the alert levels are judged on: cyanobacteria chlorophyll-a where observed,
    otherwise total chlorophyll-a (the frameworks' conservative stand-in)."""
    for quantity in ("cyanobacteria_chlorophyll", "total_chlorophyll"):
        if (records.quantity == quantity).any():
            return quantity
    return None


def reliability(records: pd.DataFrame, thresholds: tuple[float, ...],
                forecasters=("bloomline", "persistence_ensemble")) -> list[dict]:
    """Per level and forecaster: mean forecast probability, observed frequency and count per bin."""
    quantity = alert_quantity(records)
    out = []
    if quantity is None:
        return out
    sub = records[records.quantity == quantity]
    for level, threshold in enumerate(thresholds, start=1):
        for name in forecasters:
            r = sub[(sub.forecaster == name) & sub[f"p_level_{level}"].notna()]
            if r.empty:
                continue
            dec = ps.brier_decomposition(r[f"p_level_{level}"].to_numpy(float), r.observed.to_numpy(float) >= threshold,
                                         bins=RELIABILITY_BINS)
            out.append({"quantity": quantity, "level": level, "threshold_ugL": threshold, "forecaster": name,
                        "n": int(len(r)), "brier": dec.brier, "base_rate": dec.base_rate,
                        "bins": [{"forecast": float(f), "observed": float(o), "count": int(c)}
                                 for f, o, c in zip(dec.bin_forecast, dec.bin_frequency, dec.bin_count)]})
    return out


def history(records: pd.DataFrame, basin: str, lead_days: int = 1) -> pd.DataFrame:
    """Observed daily values of the alert quantity in ``basin`` with Bloomline's and the persistence
    ensemble's forecasts for them at ``lead_days`` (median and 5–95 %), by valid day."""
    quantity = alert_quantity(records)
    r = records[(records.basin_id == basin) & (records.quantity == quantity) & (records.lead_days == lead_days)]
    if r.empty:
        return pd.DataFrame(columns=["valid_utc", "observed"])
    frame = r[["valid_utc", "observed"]].drop_duplicates("valid_utc").set_index("valid_utc")
    for name in ("bloomline", "persistence_ensemble"):
        f = r[r.forecaster == name].set_index("valid_utc")[["median", "q05", "q95"]]
        frame = frame.join(f.add_prefix(f"{name}_"))
    return frame.sort_index().reset_index().replace({np.nan: None})
