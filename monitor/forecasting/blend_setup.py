"""The blend's settings for one cycle, from the water body's verified record up to the analysis.

Per chlorophyll quantity and lead day, from the score records
(:mod:`monitor.verification.live`) whose days ended in the ``RECORD_DAYS``
before the analysis, pooled over the water body's basins: the cases are the
runs in which every component in use was verified on the same day (a
component verified in fewer than half of the cases is left out of the fit).
On those cases the component weights and the spread factor are fitted
together by minimum-CRPS estimation
(:func:`assimilation.blend.fit_combination`; EMOS, Gneiting et al. 2005),
then shrunk towards the priors with the weight of ``PRIOR_DAYS`` cases
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

import numpy as np
import pandas as pd
from sqlalchemy.engine import Engine

from assimilation.blend import LeadSettings, fit_combination, shrink_settings
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
#: Share of the cases a component must be verified in to take part in the fit.
MIN_COMPONENT_SHARE = 0.5

_PRIOR = LeadSettings(dict(PRIOR_WEIGHTS))


def cases(records: pd.DataFrame) -> tuple[list[str], pd.DataFrame, pd.DataFrame, np.ndarray]:
    """(components, log means (N, C), log sds (N, C), observed log values (N,)) of one quantity and
    lead: one row per (run, basin) in which every component kept was verified."""
    comp = records[records.forecaster.isin(COMPONENTS) & records.log_sd.notna() & records.log_mean.notna()]
    if comp.empty:
        return [], pd.DataFrame(), pd.DataFrame(), np.empty(0)
    key = ["run_id", "basin_id"]
    mu = comp.pivot_table(index=key, columns="forecaster", values="log_mean", aggfunc="first")
    sd = comp.pivot_table(index=key, columns="forecaster", values="log_sd", aggfunc="first")
    obs = comp.groupby(key)["observed"].first()
    share = mu.notna().mean()
    names = [c for c in COMPONENTS if c in mu.columns and share[c] >= MIN_COMPONENT_SHARE]
    rows = mu[names].notna().all(axis=1) & sd[names].notna().all(axis=1)
    y = np.log(np.maximum(obs[rows].to_numpy(float), LOG_FLOOR_UGL))
    return names, mu.loc[rows, names], sd.loc[rows, names], y


def lead_settings(records: pd.DataFrame) -> LeadSettings:
    """The blend of one lead from its records (one quantity, one lead)."""
    names, mu, sd, y = cases(records)
    if len(y) < MIN_CASES or not names:
        return _PRIOR
    prior = np.array([PRIOR_WEIGHTS.get(c, 0.0) for c in names]) + 1e-3
    fitted = fit_combination(mu.to_numpy(), sd.to_numpy(), y, prior)
    return shrink_settings(names, fitted, PRIOR_WEIGHTS, len(y), PRIOR_DAYS)


def blend_settings(records: pd.DataFrame, analysis: dt.datetime, horizon: int) -> dict[str, list[LeadSettings]]:
    """Per chlorophyll quantity, the settings of leads 1..horizon from the ``records`` (``RECORD_COLUMNS``)."""
    if len(records):
        records = records[(records.valid_utc <= pd.Timestamp(analysis))
                          & (records.valid_utc > pd.Timestamp(analysis) - pd.Timedelta(days=RECORD_DAYS))]
    out = {}
    for quantity in OBSERVED_BY:
        sub = records[records.quantity == quantity] if len(records) else records
        by_lead = dict(tuple(sub.groupby("lead_days"))) if len(sub) else {}
        out[quantity] = [lead_settings(by_lead[k]) if k in by_lead else _PRIOR for k in range(1, horizon + 1)]
    return out


def read_blend_settings(engine: Engine, wb: WaterBodyConfig, analysis: dt.datetime) -> dict[str, list[LeadSettings]]:
    """:func:`blend_settings` from the records stored for ``wb``."""
    from monitor.verification.live import stored_records

    records = stored_records(engine, wb.id, since=analysis - dt.timedelta(days=RECORD_DAYS))
    return blend_settings(records, analysis, wb.alerts.horizon_days)
