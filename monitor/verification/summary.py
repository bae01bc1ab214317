"""Scores of paired forecasts, per forecaster, by lead day (and basin), with skill against the baselines.

The point forecast of an ensemble is its median (the median of the log is the
log of the median, so MAE of ln and the log bias need no back-transform
correction). Interval coverage uses the members' central 50 % and 90 %
intervals; the spread-to-error ratio is computed in natural-log space, where
chlorophyll-a errors are close to symmetric. Alert-level scores use the
probability that the day's value reaches the level: the fraction of members
whose daily mean reaches it, the same estimator for every forecaster.
Methods: :mod:`assimilation.scores` and :mod:`assimilation.probability_scores`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from assimilation import probability_scores as ps
from assimilation import scores
from assimilation.scores import LOG_FLOOR_UGL
from monitor.verification.pairs import BASELINES, FORECASTERS, Pairs


def _stack(members: list[np.ndarray]) -> np.ndarray:
    """Member arrays of equal size → (M, N); arrays of unequal size are padded by their quantiles."""
    sizes = {m.size for m in members}
    if len(sizes) == 1:
        return np.stack(members, axis=1)
    m_max = max(sizes)
    q = (np.arange(m_max) + 0.5) / m_max
    return np.stack([np.quantile(m, q) if m.size != m_max else m for m in members], axis=1)


def ensemble_scores(E: np.ndarray, y: np.ndarray) -> dict[str, float]:
    """Scores of an ensemble ``E`` (M, N) [µg/L] against observations ``y`` (N,) [µg/L]."""
    median = np.median(E, axis=0)
    logE = np.log(np.maximum(E, LOG_FLOOR_UGL))
    logy = np.log(np.maximum(y, LOG_FLOOR_UGL))
    out = {
        "n": int(y.size),
        "crps": float(np.mean(scores.crps_ensemble(E, y))),
        "crps_fair": float(np.mean(scores.crps_ensemble(E, y, fair=True))) if E.shape[0] > 1 else float("nan"),
        "mae": scores.mean_absolute_error(median, y),
        "mae_ln": scores.mean_absolute_log_error(median, y),
        "bias_ln": scores.mean_log_bias(median, y),
        "coverage_50": scores.ensemble_interval_coverage(E, y, 0.5) if E.shape[0] > 1 else float("nan"),
        "coverage_90": scores.ensemble_interval_coverage(E, y, 0.9) if E.shape[0] > 1 else float("nan"),
        "spread_error_ln": scores.spread_error_ratio(logE, logy) if E.shape[0] > 1 else float("nan"),
    }
    return out


def level_scores(E: np.ndarray, y: np.ndarray, threshold: float, warn_probability: float) -> dict[str, float]:
    """Brier score with Murphy's decomposition, ROC area and contingency counts for one level."""
    p = (E >= threshold).mean(axis=0)
    o = y >= threshold
    dec = ps.brier_decomposition(p, o)
    counts = ps.contingency_counts(p, o, warn_probability)
    both = bool(o.any() and (~o).any())
    return {"brier": dec.brier, "reliability": dec.reliability, "resolution": dec.resolution,
            "uncertainty": dec.uncertainty, "roc_area": ps.roc_area(p, o) if both else float("nan"),
            "hits": counts.hits, "misses": counts.misses, "false_alarms": counts.false_alarms,
            "correct_negatives": counts.correct_negatives}


def _groups(meta: pd.DataFrame, by: list[str]):
    if not len(meta):
        return []
    return meta.groupby(by, sort=True).indices.items()


def score_table(pairs: Pairs, by: list[str], levels: dict[str, tuple[float, ...]] | None = None,
                warn_probability: dict[str, float] | None = None) -> pd.DataFrame:
    """One row per (group of ``by``, forecaster): the ensemble scores and, per level, its scores.

    ``levels`` maps a water body to its thresholds [µg/L]; level scores are
    given where every pair of the group shares one water body's thresholds.
    """
    rows = []
    for key, index in _groups(pairs.meta, by):
        key = key if isinstance(key, tuple) else (key,)
        wbs = set(pairs.meta.water_body.iloc[index])
        for name in FORECASTERS:
            have = [i for i in index if pairs.members[name][i] is not None]
            if not have:
                continue
            E = _stack([pairs.members[name][i] for i in have])
            y = pairs.meta.observed.to_numpy(dtype=float)[have]
            row = dict(zip(by, key), forecaster=name, **ensemble_scores(E, y))
            if levels and len(wbs) == 1:
                wb = next(iter(wbs))
                for lv, thr in enumerate(levels.get(wb, ()), start=1):
                    for metric, value in level_scores(E, y, thr, (warn_probability or {}).get(wb, 0.5)).items():
                        row[f"level_{lv}_{metric}"] = value
            rows.append(row)
    return pd.DataFrame(rows)


def skill_table(pairs: Pairs, by: list[str]) -> pd.DataFrame:
    """CRPS skill of Bloomline against each baseline, ``1 − CRPS/CRPS_ref``, on the pairs both forecast."""
    rows = []
    for key, index in _groups(pairs.meta, by):
        key = key if isinstance(key, tuple) else (key,)
        y = pairs.meta.observed.to_numpy(dtype=float)
        for ref in BASELINES:
            both = [i for i in index if pairs.members[ref][i] is not None]
            if not both:
                continue
            crps = {}
            for name in ("bloomline", ref):
                E = _stack([pairs.members[name][i] for i in both])
                crps[name] = float(np.mean(scores.crps_ensemble(E, y[both])))
            skill = 1.0 - crps["bloomline"] / crps[ref] if crps[ref] > 0 else float("nan")
            rows.append(dict(zip(by, key), reference=ref, n=len(both), crps_bloomline=crps["bloomline"],
                             crps_reference=crps[ref], crps_skill=skill))
    return pd.DataFrame(rows)
