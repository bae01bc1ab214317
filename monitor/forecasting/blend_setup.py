"""The blend's settings for one cycle, from the water body's verified record up to the analysis.

Per chlorophyll quantity and lead day, from the score records
(:mod:`monitor.verification.live`) whose days ended in the ``RECORD_DAYS``
before the analysis, pooled over the water body's basins: the cases are the
runs in which every component in use was verified on the same day (a
component verified in fewer than half of the cases is left out of the fit).
On those cases the component weights and the spread factor are fitted
together by minimum-CRPS estimation
(:func:`assimilation.blend.fit_combination`; EMOS, Gneiting et al. 2005), the
spread factor raised where needed so that the central 90 % interval covers
90 % of the cases (:func:`assimilation.blend.coverage_spread_factor`), then
shrunk towards the priors with the weight of ``PRIOR_DAYS`` cases
(:func:`assimilation.blend.shrink_settings`).

With fewer than ``MIN_CASES`` cases the documented priors apply: the process
model and the two statistical forecasts in the proportions of
``PRIOR_WEIGHTS`` (Bloomline's choice: the process model alone was measured
to lose to persistence, the statistical forecasts to be close to it; the
record takes over within weeks) and no spread change. Only
records of days that ended at or before the analysis are read, so a hindcast
stays free of look-ahead.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

import numpy as np
import pandas as pd
from sqlalchemy.engine import Engine

from assimilation.blend import SPREAD_FACTOR_BOUNDS, LeadSettings, coverage_spread_factor, fit_combination, shrink_settings
from assimilation.scores import LOG_FLOOR_UGL
from monitor.config import WaterBodyConfig
from monitor.forecasting.history import OBSERVED_BY

PROCESS = "process_model"
BLEND = "blend"
UNCALIBRATED = "blend_raw"
#: The forecasters the blend may combine (the one-member persistence forecast is not a distribution;
#: the day-of-year climatology needs earlier years and was far less skilful where it had them).
COMPONENTS = (PROCESS, "persistence_ensemble", "statistical")
PRIOR_WEIGHTS = {PROCESS: 0.4, "persistence_ensemble": 0.3, "statistical": 0.3}
PRIOR_DAYS = 20
RECORD_DAYS = 60
#: Cases (verified days with every component) needed before the record is fitted at all.
MIN_CASES = 10
#: The central interval whose coverage on the record the spread is raised to meet.
COVERAGE = 0.90
#: Share of the cases a component must be verified in to take part in the fit.
MIN_COMPONENT_SHARE = 0.5

_PRIOR = LeadSettings(dict(PRIOR_WEIGHTS))


@dataclass(frozen=True)
class Cases:
    """The record of one quantity and lead as arrays: one row per (run, basin) verified day."""

    mu: np.ndarray      # (N, C) components' member mean of log chlorophyll-a (NaN where not verified)
    sd: np.ndarray      # (N, C) components' member sd of log chlorophyll-a
    y: np.ndarray       # (N,) observed log value


def case_table(records: pd.DataFrame) -> dict[int, Cases]:
    """Per lead day, the :class:`Cases` of one quantity's records (every forecaster of ``COMPONENTS``
    in that order, in one pass over the records)."""
    comp = records[records.forecaster.isin(COMPONENTS) & records.log_sd.notna() & records.log_mean.notna()]
    if comp.empty:
        return {}
    keys = pd.MultiIndex.from_frame(comp[["lead_days", "run_id", "basin_id"]])
    codes, uniques = pd.factorize(keys)
    col = comp.forecaster.map({c: i for i, c in enumerate(COMPONENTS)}).to_numpy(int)
    n, c = len(uniques), len(COMPONENTS)
    mu, sd, obs = np.full((n, c), np.nan), np.full((n, c), np.nan), np.full(n, np.nan)
    mu[codes, col] = comp.log_mean.to_numpy(float)
    sd[codes, col] = comp.log_sd.to_numpy(float)
    obs[codes] = comp.observed.to_numpy(float)
    y = np.log(np.maximum(obs, LOG_FLOOR_UGL))
    lead = np.asarray(uniques.get_level_values(0), dtype=int)
    return {int(k): Cases(mu[lead == k], sd[lead == k], y[lead == k]) for k in np.unique(lead)}


def fit_lead(cases: Cases) -> LeadSettings:
    """The blend of one lead from its cases: components verified in at least ``MIN_COMPONENT_SHARE``
    of them take part, on the cases where all of those were verified."""
    if not len(cases.y):
        return _PRIOR
    share = np.isfinite(cases.mu).mean(axis=0)
    keep = np.flatnonzero(share >= MIN_COMPONENT_SHARE)
    rows = np.all(np.isfinite(cases.mu[:, keep]) & np.isfinite(cases.sd[:, keep]), axis=1) & np.isfinite(cases.y)
    if rows.sum() < MIN_CASES or not len(keep):
        return _PRIOR
    names = [COMPONENTS[i] for i in keep]
    prior = np.array([PRIOR_WEIGHTS.get(c, 0.0) for c in names]) + 1e-3
    mu, sd, y = cases.mu[rows][:, keep], cases.sd[rows][:, keep], cases.y[rows]
    weights, spread = fit_combination(mu, sd, y, prior)
    spread = min(max(spread, coverage_spread_factor(mu, sd, y, weights, COVERAGE)), SPREAD_FACTOR_BOUNDS[1])
    return shrink_settings(names, (weights, spread), PRIOR_WEIGHTS, int(rows.sum()), PRIOR_DAYS)


def lead_settings(records: pd.DataFrame) -> LeadSettings:
    """The blend of one lead from its records (one quantity, one lead)."""
    table = case_table(records)
    return fit_lead(next(iter(table.values()))) if table else _PRIOR


def blend_settings(records: pd.DataFrame, analysis: dt.datetime, horizon: int) -> dict[str, list[LeadSettings]]:
    """Per chlorophyll quantity, the settings of leads 1..horizon from the ``records`` (``RECORD_COLUMNS``)."""
    if len(records):
        records = records[(records.valid_utc <= pd.Timestamp(analysis))
                          & (records.valid_utc > pd.Timestamp(analysis) - pd.Timedelta(days=RECORD_DAYS))]
    out = {}
    for quantity in OBSERVED_BY:
        table = case_table(records[records.quantity == quantity]) if len(records) else {}
        out[quantity] = [fit_lead(table[k]) if k in table else _PRIOR for k in range(1, horizon + 1)]
    return out


def read_blend_settings(engine: Engine, wb: WaterBodyConfig, analysis: dt.datetime) -> dict[str, list[LeadSettings]]:
    """:func:`blend_settings` from the records stored for ``wb``."""
    from monitor.verification.live import stored_records

    records = stored_records(engine, wb.id, since=analysis - dt.timedelta(days=RECORD_DAYS), forecasters=COMPONENTS)
    return blend_settings(records, analysis, wb.alerts.horizon_days)
