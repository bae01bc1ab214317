"""Hindcast output: the pairs as CSV rows, and the scores as a JSON-ready summary.

CSV: one row per (origin, water body, basin, quantity, lead day); columns are
documented in README.md ("Hindcast output"). Times are UTC in ISO 8601.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from assimilation.forecast import QUANTILES
from monitor.verification.pairs import FORECASTERS

STATISTICS = ("mean", *(f"q{round(q * 100):02d}" for q in QUANTILES))


def pair_rows(result, levels: dict[str, tuple[float, ...]]) -> pd.DataFrame:
    """The hindcast's pairs with each forecaster's mean, quantiles and level probabilities."""
    meta = result.pairs.meta.copy()
    n_levels = max((len(v) for v in levels.values()), default=0)
    columns: dict[str, list] = {}
    for name in FORECASTERS:
        for stat in STATISTICS:
            columns[f"{name}_{stat}"] = []
        for lv in range(1, n_levels + 1):
            columns[f"{name}_p_level_{lv}"] = []
    for i, wb in enumerate(meta.water_body):
        thresholds = levels.get(wb, ())
        for name in FORECASTERS:
            m = result.pairs.members[name][i]
            stats = ([np.nan] * len(STATISTICS) if m is None
                     else [float(np.mean(m)), *np.quantile(m, QUANTILES).tolist()])
            for stat, value in zip(STATISTICS, stats):
                columns[f"{name}_{stat}"].append(value)
            for lv in range(1, n_levels + 1):
                p = np.nan if m is None or lv > len(thresholds) else float(np.mean(m >= thresholds[lv - 1]))
                columns[f"{name}_p_level_{lv}"].append(p)
    out = pd.concat([meta, pd.DataFrame(columns, index=meta.index)], axis=1)
    for col in ("origin_utc", "valid_utc"):
        out[col] = pd.to_datetime(out[col], utc=True).dt.strftime("%Y-%m-%dT%H:%M:%SZ")
    return out


def _clean(value):
    if isinstance(value, (float, np.floating)):
        return None if not math.isfinite(float(value)) else round(float(value), 6)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, pd.Timestamp):
        return value.strftime("%Y-%m-%dT%H:%M:%SZ")
    return value


def records(frame: pd.DataFrame) -> list[dict]:
    """A table as JSON-ready records (NaN → null, numbers rounded to 6 decimals)."""
    return [{k: _clean(v) for k, v in row.items()} for row in frame.to_dict(orient="records")]


def summary(result) -> dict:
    """The hindcast's scores as one JSON-ready dict."""
    return {
        "first_origin_utc": result.days[0].strftime("%Y-%m-%dT%H:%M:%SZ"),
        "last_origin_utc": result.days[-1].strftime("%Y-%m-%dT%H:%M:%SZ"),
        "origins": len(result.days),
        "pairs": int(len(result.pairs.meta)),
        "cycle_statuses": result.statuses,
        "seconds": round(result.seconds, 1),
        "by_lead": records(result.by_lead),
        "skill_by_lead": records(result.skill_by_lead),
        "by_basin": records(result.by_basin),
        "warnings": records(result.warnings),
    }


def headline(result) -> pd.DataFrame:
    """CRPS per lead of each forecaster and Bloomline's skill against the persistence ensemble,
    coverage and bias: the table a terminal shows."""
    by = result.by_lead
    if by.empty:
        return pd.DataFrame()
    crps = by.pivot_table(index=["quantity", "lead_days"], columns="forecaster", values="crps")
    bl = by[by.forecaster == "bloomline"].set_index(["quantity", "lead_days"])
    sk = result.skill_by_lead
    skill = sk[sk.reference == "persistence_ensemble"].set_index(["quantity", "lead_days"]).crps_skill
    table = crps.rename(columns=lambda c: f"crps_{c}")
    table["skill_vs_persistence_ens"] = skill
    table["coverage_90"] = bl.coverage_90
    table["bias_ln"] = bl.bias_ln
    table["n"] = bl.n
    return table.round(3)
