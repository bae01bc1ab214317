"""The blend's settings for one cycle, from the water body's verified record up to the analysis.

Per chlorophyll quantity and lead day, from the score records
(:mod:`monitor.verification.live`) whose days ended in the ``RECORD_DAYS``
before the analysis, pooled over the water body's basins:

* component weights ∝ 1/CRPS² of each component's record, shrunk towards
  ``PRIOR_WEIGHTS`` with the weight of ``PRIOR_DAYS`` verified days
  (:func:`assimilation.blend.inverse_crps_weights`);
* the uncalibrated blend's (``blend_raw``) mean log error, and the factor on
  its log spread that makes its central 90 % interval cover 90 % of its
  record: the 90th percentile of |log error − mean log error| / (log spread ·
  sqrt((M + 1)/M)) divided by the normal quantile 1.645 (coverage matching, the
  aim of EMOS; Gneiting et al. 2005), both shrunk towards no correction in the
  same way.

With no record yet the documented priors apply: the process model and the
two statistical forecasts in the proportions of ``PRIOR_WEIGHTS`` (Bloomline's
choice: the process model alone was measured to lose to persistence, the
statistical forecasts to be close to it; the record takes over within weeks),
no bias correction, no spread change. Only records of days that ended at or
before the analysis are read, so a hindcast stays free of look-ahead.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
from sqlalchemy.engine import Engine

from assimilation.blend import LeadSettings, inverse_crps_weights
from assimilation.scores import LOG_FLOOR_UGL
from monitor.config import WaterBodyConfig
from monitor.forecasting.history import OBSERVED_BY

PROCESS = "process_model"
BLEND = "blend"
UNCALIBRATED = "blend_raw"
#: The forecasters the blend may combine (the one-member persistence forecast is not a distribution).
COMPONENTS = (PROCESS, "persistence_ensemble", "statistical", "climatology")
PRIOR_WEIGHTS = {PROCESS: 0.4, "persistence_ensemble": 0.3, "statistical": 0.3}
PRIOR_DAYS = 20
RECORD_DAYS = 60
#: The central interval whose coverage the calibration matches, and its standard normal half-width.
COVERAGE = 0.90
NORMAL_Z_95 = 1.6448536269514722


def _shrink(n: int) -> float:
    return n / (n + PRIOR_DAYS)


def lead_settings(records: pd.DataFrame) -> LeadSettings:
    """The blend of one lead from its records (one quantity, one lead)."""
    comp = records[records.forecaster.isin(COMPONENTS)]
    stats = comp.groupby("forecaster").crps.agg(["mean", "size"])
    raw = records[(records.forecaster == UNCALIBRATED) & records.log_sd.notna()]
    return _settings(stats, raw)


def _settings(stats: pd.DataFrame, raw: pd.DataFrame) -> LeadSettings:
    """Weights from the components' (mean CRPS, count) and calibration from the uncalibrated blend's records."""
    weights = inverse_crps_weights(stats["mean"].to_dict(), stats["size"].to_dict(), PRIOR_WEIGHTS, PRIOR_DAYS)
    if len(raw) < 2:
        return LeadSettings(weights)
    err = raw.log_mean.to_numpy(float) - np.log(np.maximum(raw.observed.to_numpy(float), LOG_FLOOR_UGL))
    m = raw["members"].to_numpy(float)
    bias = float(err.mean())
    sd = raw.log_sd.to_numpy(float) * np.sqrt((m + 1) / m)
    ok = sd > 0
    a = _shrink(len(raw))
    if not ok.any():
        return LeadSettings(weights, bias_ln=a * bias)
    ratio = float(np.quantile(np.abs(err[ok] - bias) / sd[ok], COVERAGE)) / NORMAL_Z_95
    factor = float(np.exp(a * np.log(ratio))) if ratio > 0 else 1.0
    return LeadSettings(weights, bias_ln=a * bias, spread_factor=factor)


def blend_settings(records: pd.DataFrame, analysis: dt.datetime, horizon: int) -> dict[str, list[LeadSettings]]:
    """Per chlorophyll quantity, the settings of leads 1..horizon from the ``records`` (``RECORD_COLUMNS``)."""
    if len(records):
        records = records[(records.valid_utc <= pd.Timestamp(analysis))
                          & (records.valid_utc > pd.Timestamp(analysis) - pd.Timedelta(days=RECORD_DAYS))]
    empty_stats = pd.DataFrame({"mean": pd.Series(dtype=float), "size": pd.Series(dtype=int)})
    out = {}
    for quantity in OBSERVED_BY:
        sub = records[records.quantity == quantity] if len(records) else records
        if not len(sub):
            out[quantity] = [LeadSettings(inverse_crps_weights({}, {}, PRIOR_WEIGHTS, PRIOR_DAYS))] * horizon
            continue
        comp = sub[sub.forecaster.isin(COMPONENTS)].groupby(["lead_days", "forecaster"]).crps.agg(["mean", "size"])
        raw = sub[(sub.forecaster == UNCALIBRATED) & sub.log_sd.notna()]
        raw_by_lead = dict(tuple(raw.groupby("lead_days")))
        leads = set(comp.index.get_level_values(0))
        out[quantity] = [_settings(comp.loc[k] if k in leads else empty_stats, raw_by_lead.get(k, raw.iloc[:0]))
                         for k in range(1, horizon + 1)]
    return out


def read_blend_settings(engine: Engine, wb: WaterBodyConfig, analysis: dt.datetime) -> dict[str, list[LeadSettings]]:
    """:func:`blend_settings` from the records stored for ``wb``."""
    from monitor.verification.live import stored_records

    records = stored_records(engine, wb.id, since=analysis - dt.timedelta(days=RECORD_DAYS))
    return blend_settings(records, analysis, wb.alerts.horizon_days)
