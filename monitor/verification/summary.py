"""Scores summarised from score records, per forecaster, by lead day (and basin), with skill.

The point forecast of an ensemble is its median (the median of the log is the
log of the median, so MAE of ln and the log bias need no back-transform
correction). Interval coverage uses the members' central 50 % and 90 %
intervals; the spread-to-error ratio is computed in natural-log space, where
chlorophyll-a errors are close to symmetric, with the finite-ensemble factor
(M + 1)/M. Alert-level scores use the probability that the day's value
reaches the level (:mod:`monitor.verification.records`). Methods:
:mod:`assimilation.scores` and :mod:`assimilation.probability_scores`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from assimilation import probability_scores as ps
from assimilation.scores import LOG_FLOOR_UGL
from monitor.verification.pairs import BASELINES, FORECASTERS
from monitor.verification.records import MAX_LEVELS


def _ln(x) -> np.ndarray:
    return np.log(np.maximum(np.asarray(x, dtype=float), LOG_FLOOR_UGL))


def ensemble_scores(r: pd.DataFrame) -> dict[str, float]:
    """Scores of one forecaster's records ``r`` (one group)."""
    y = r.observed.to_numpy(dtype=float)
    err_ln = _ln(r["median"]) - _ln(y)
    M = r["members"].to_numpy(dtype=float)
    multi = M > 1
    out = {
        "n": int(len(r)),
        "crps": float(r.crps.mean()),
        "crps_fair": float(r.crps_fair[multi].mean()) if multi.any() else float("nan"),
        "mae": float(np.mean(np.abs(r["median"].to_numpy(dtype=float) - y))),
        "mae_ln": float(np.mean(np.abs(err_ln))),
        "bias_ln": float(np.mean(err_ln)),
        "coverage_50": float(np.mean((r.q25 <= y) & (y <= r.q75))) if multi.any() else float("nan"),
        "coverage_90": float(np.mean((r.q05 <= y) & (y <= r.q95))) if multi.any() else float("nan"),
        "spread_error_ln": float("nan"),
    }
    if multi.any():
        rm = r[multi]
        spread = np.sqrt(np.mean(rm.log_sd.to_numpy(dtype=float) ** 2 * (M[multi] + 1) / M[multi]))
        rmse = np.sqrt(np.mean((rm.log_mean.to_numpy(dtype=float) - _ln(rm.observed)) ** 2))
        out["spread_error_ln"] = float(spread / rmse) if rmse > 0 else float("inf")
    return out


def level_scores(r: pd.DataFrame, level: int, threshold: float, warn_probability: float) -> dict[str, float]:
    """Brier score with Murphy's decomposition, ROC area and contingency counts for one level."""
    p = r[f"p_level_{level}"].to_numpy(dtype=float)
    o = r.observed.to_numpy(dtype=float) >= threshold
    dec = ps.brier_decomposition(p, o)
    counts = ps.contingency_counts(p, o, warn_probability)
    both = bool(o.any() and (~o).any())
    return {"brier": dec.brier, "reliability": dec.reliability, "resolution": dec.resolution,
            "uncertainty": dec.uncertainty, "roc_area": ps.roc_area(p, o) if both else float("nan"),
            "hits": counts.hits, "misses": counts.misses, "false_alarms": counts.false_alarms,
            "correct_negatives": counts.correct_negatives}


def score_table(records: pd.DataFrame, by: list[str], levels: dict[str, tuple[float, ...]] | None = None,
                warn_probability: dict[str, float] | None = None) -> pd.DataFrame:
    """One row per (group of ``by``, forecaster): the ensemble scores and, per level, its scores.

    Level scores are given where every record of the group belongs to one water body.
    """
    rows = []
    if records.empty:
        return pd.DataFrame()
    for key, group in records.groupby(by, sort=True):
        key = key if isinstance(key, tuple) else (key,)
        wbs = set(group.water_body)
        for name in FORECASTERS:
            r = group[group.forecaster == name]
            if r.empty:
                continue
            row = dict(zip(by, key), forecaster=name, **ensemble_scores(r))
            if levels and len(wbs) == 1:
                wb = next(iter(wbs))
                for lv, thr in enumerate(levels.get(wb, ())[:MAX_LEVELS], start=1):
                    for metric, value in level_scores(r, lv, thr, (warn_probability or {}).get(wb, 0.5)).items():
                        row[f"level_{lv}_{metric}"] = value
            rows.append(row)
    return pd.DataFrame(rows)


def skill_table(records: pd.DataFrame, by: list[str], forecaster: str = "bloomline") -> pd.DataFrame:
    """CRPS skill of ``forecaster`` (the published forecast by default) against each baseline,
    ``1 − CRPS/CRPS_ref``, on the pairs both forecast."""
    if records.empty:
        return pd.DataFrame()
    key = ["run_id", "water_body", "basin_id", "quantity", "lead_days"]
    bl = records[records.forecaster == forecaster].set_index(key)
    rows = []
    for ref in BASELINES:
        other = records[records.forecaster == ref].set_index(key)[["crps"]].rename(columns={"crps": "crps_ref"})
        both = bl[["crps", *[c for c in by if c not in key]]].join(other, how="inner")
        if both.empty:
            continue
        both = both.reset_index()
        for k, g in both.groupby(by, sort=True):
            k = k if isinstance(k, tuple) else (k,)
            ref_crps = float(g.crps_ref.mean())
            rows.append(dict(zip(by, k), reference=ref, n=len(g), crps_bloomline=float(g.crps.mean()),
                             crps_reference=ref_crps,
                             crps_skill=1.0 - float(g.crps.mean()) / ref_crps if ref_crps > 0 else float("nan")))
    return pd.DataFrame(rows)


def rank_histogram(records: pd.DataFrame, forecaster: str = "bloomline") -> list[int]:
    """Counts of the observation's rank among the members (Hamill 2001), for the commonest member count."""
    r = records[records.forecaster == forecaster]
    if r.empty:
        return []
    M = int(r["members"].mode().iloc[0])
    ranks = r[r["members"] == M]["rank"].to_numpy(dtype=int)
    return np.bincount(ranks, minlength=M + 1).tolist()
