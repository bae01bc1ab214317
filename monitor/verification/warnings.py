"""Warning lead times: how long before each first crossing of an alert level the warning stood.

For Bloomline the warning is the alert rule's level in force after each
replayed cycle (the published status, with its hysteresis). For a baseline
it is its outlook: the rule fires on a day when the baseline's probability of
reaching the level within the horizon is at least the water body's
``warn_probability`` (no hysteresis). Crossings are found in the observed
daily series of the quantity the alert levels apply to: cyanobacteria
chlorophyll-a (phycocyanin) where a basin has it, otherwise total
chlorophyll-a as the frameworks' conservative stand-in. Definitions of a
crossing and a lead: :mod:`assimilation.warning_lead`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from assimilation.warning_lead import warning_leads
from monitor.config import WaterBodyConfig
from monitor.timeutil import from_epoch_days, to_epoch_days
from monitor.verification.pairs import BASELINES

COLUMNS = ["water_body", "basin_id", "level", "threshold_ugL", "quantity", "crossing_utc", "forecaster",
           "lead_days"]


def _alert_series(observed: dict, water_body: str, basin: str) -> tuple[str, pd.Series]:
    """(quantity, daily values indexed by window end) the alert levels are judged on in ``basin``."""
    for quantity in ("cyanobacteria_chlorophyll", "total_chlorophyll"):
        frame = observed.get((water_body, basin, quantity))
        if frame is not None and len(frame):
            return quantity, frame.value
    return "", pd.Series(dtype=float)


def warning_table(bodies: list[WaterBodyConfig], replayed, observed: dict, outlooks: pd.DataFrame) -> pd.DataFrame:
    """One row per (first crossing in a season, forecaster) with the warning lead [d]."""
    if not replayed:
        return pd.DataFrame(columns=COLUMNS)
    days = [d.analysis for d in replayed]
    days_d = np.asarray(to_epoch_days(pd.DatetimeIndex(days)), dtype=float)
    rows = []
    for wb in bodies:
        for basin in (b.id for b in wb.basins):
            quantity, series = _alert_series(observed, wb.id, basin)
            if not quantity:
                continue
            values = series.reindex(pd.DatetimeIndex(days)).to_numpy(dtype=float)
            for lv, level in enumerate(wb.alerts.levels, start=1):
                fired = {"bloomline": np.array([d.levels.get((wb.id, basin), 0) >= lv for d in replayed])}
                sub = outlooks[(outlooks.water_body == wb.id) & (outlooks.basin_id == basin)
                               & (outlooks.quantity == quantity) & (outlooks.level == lv)]
                for name in BASELINES:
                    p = sub[sub.forecaster == name].set_index("origin_utc").probability
                    p = p.reindex(pd.DatetimeIndex(days)).to_numpy(dtype=float)
                    fired[name] = np.nan_to_num(p, nan=0.0) >= wb.alerts.warn_probability
                for name, state in fired.items():
                    leads = warning_leads(days_d, state, values, level.chlorophyll_ugL)
                    for day_d, lead in zip(leads.day_d, leads.lead_days):
                        rows.append(dict(water_body=wb.id, basin_id=basin, level=lv,
                                         threshold_ugL=level.chlorophyll_ugL, quantity=quantity,
                                         crossing_utc=from_epoch_days(day_d), forecaster=name,
                                         lead_days=float(lead)))
    return pd.DataFrame(rows, columns=COLUMNS)
