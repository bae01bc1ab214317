"""One score record per (pair, forecaster): what the summaries, the stored record and the pages read.

A record keeps, for one forecaster's members on one verified day, the scores
that add up over many days: the CRPS (standard and fair form, Hersbach 2000;
Ferro 2014), the median and the 5, 25, 75 and 95 % quantiles (for MAE, log
errors and interval coverage), the members' mean and sd in natural-log space
(for the spread-to-error ratio), the observation's rank among the members
(Hamill 2001; ties broken by a generator seeded from the run, so a record is
reproducible) and the probability of reaching each alert level (fraction of
members whose daily mean reaches it). Hindcasts and the live record are
summarised from the same records.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from assimilation import scores
from assimilation.scores import LOG_FLOOR_UGL
from monitor.verification.pairs import FORECASTERS, META_COLUMNS, Pairs

QUANTILE_COLUMNS = {"q05": 0.05, "q25": 0.25, "median": 0.5, "q75": 0.75, "q95": 0.95}
MAX_LEVELS = 4
SCORE_COLUMNS = ["forecaster", "members", "crps", "crps_fair", *QUANTILE_COLUMNS, "log_mean", "log_sd", "rank",
                 *(f"p_level_{k}" for k in range(1, MAX_LEVELS + 1))]
RECORD_COLUMNS = [*META_COLUMNS, *SCORE_COLUMNS]


def _records_for(E: np.ndarray, y: np.ndarray, thresholds: list[tuple[float, ...]], seeds: np.ndarray) -> dict:
    """Score columns of cases with equal member counts: ``E`` (M, N), ``y`` (N,)."""
    M = E.shape[0]
    out: dict[str, np.ndarray] = {"members": np.full(y.size, M)}
    out["crps"] = scores.crps_ensemble(E, y)
    out["crps_fair"] = scores.crps_ensemble(E, y, fair=True) if M > 1 else np.full(y.size, np.nan)
    q = np.quantile(E, list(QUANTILE_COLUMNS.values()), axis=0)
    for k, name in enumerate(QUANTILE_COLUMNS):
        out[name] = q[k]
    logE = np.log(np.maximum(E, LOG_FLOOR_UGL))
    out["log_mean"] = logE.mean(axis=0)
    out["log_sd"] = logE.std(axis=0, ddof=1) if M > 1 else np.full(y.size, np.nan)
    below, equal = (E < y).sum(axis=0), (E == y).sum(axis=0)
    out["rank"] = np.array([b + np.random.default_rng(int(s)).integers(0, e + 1)
                            for b, e, s in zip(below, equal, seeds)])
    for k in range(MAX_LEVELS):
        thr = np.array([t[k] if k < len(t) else np.nan for t in thresholds])
        out[f"p_level_{k + 1}"] = np.where(np.isfinite(thr), (E >= thr).mean(axis=0), np.nan)
    return out


def pair_records(pairs: Pairs, levels: dict[str, tuple[float, ...]]) -> pd.DataFrame:
    """The score records (``RECORD_COLUMNS``) of every pair and forecaster.

    ``levels`` maps a water body to its alert thresholds [µg/L] (at most ``MAX_LEVELS``).
    """
    meta = pairs.meta.reset_index(drop=True)
    parts = []
    for name in FORECASTERS:
        have = [i for i, m in enumerate(pairs.members.get(name, ())) if m is not None]
        by_size: dict[int, list[int]] = {}
        for i in have:
            by_size.setdefault(pairs.members[name][i].size, []).append(i)
        for idx in by_size.values():
            E = np.stack([pairs.members[name][i] for i in idx], axis=1)
            sub = meta.iloc[idx]
            y = sub.observed.to_numpy(dtype=float)
            seeds = sub.run_id.to_numpy(dtype=np.int64) * 1000 + sub.lead_days.to_numpy(dtype=np.int64)
            cols = _records_for(E, y, [levels.get(w, ()) for w in sub.water_body], seeds)
            parts.append(sub.assign(forecaster=name, **cols))
    if not parts:
        return pd.DataFrame(columns=RECORD_COLUMNS)
    return pd.concat(parts, ignore_index=True)[RECORD_COLUMNS]
