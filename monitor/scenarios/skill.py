"""The process model's recent skill, shown beside a what-if so the operator can judge how far to trust it.

The live record's score records of the last :data:`WINDOW_DAYS` days
(:func:`monitor.verification.live.stored_records`, read-only) are summarised by lead day
(:func:`monitor.verification.summary.skill_table`): the CRPS skill of the process model's own
ensemble (a what-if runs it, not the published blend) against the persistence ensemble,
1 − CRPS/CRPS_persistence (Hersbach 2000, Wea. Forecasting 15:559),
for the cyanobacterial chlorophyll-a the alert levels apply to. Positive: better than assuming
that the coming days look like the last ones; zero or negative: no better.
"""

from __future__ import annotations

import datetime as dt
import math

from sqlalchemy.engine import Engine

from monitor.alerting.rules import QUANTITY
from monitor.config import Config, WaterBodyConfig
from monitor.timeutil import as_utc
from monitor.verification.live import stored_records
from monitor.verification.summary import skill_table

WINDOW_DAYS = 60
REFERENCE = "persistence_ensemble"


def recent_skill(engine: Engine, config: Config, wb: WaterBodyConfig, *, now: dt.datetime) -> dict:
    """CRPS skill by lead day over the runs of the last :data:`WINDOW_DAYS` days up to ``now``
    (aware UTC); ``available`` False with a sentence when there is no verified record yet."""
    last = as_utc(now)
    first = last - dt.timedelta(days=WINDOW_DAYS)
    out = {"window_days": WINDOW_DAYS, "quantity": QUANTITY, "reference": REFERENCE,
           "measure": "CRPS skill against the persistence ensemble, 1 - CRPS/CRPS_reference (1 is perfect, "
                      "0 no better than persistence, below 0 worse)"}
    records = stored_records(engine, wb.id, since=first)
    records = records[records.valid_utc <= last] if len(records) else records
    table = skill_table(records, by=["quantity", "lead_days"], forecaster="process_model")
    if len(table):
        table = table[(table.quantity == QUANTITY) & (table.reference == REFERENCE)]
    if not len(table):
        return {**out, "available": False, "by_lead": [],
                "message": (f"No verified record yet: none of {wb.name}'s forecasts of the last {WINDOW_DAYS} "
                            f"days has been compared with later cyanobacteria readings, so how well the model "
                            f"does here is not known.")}
    rows = [{"lead_days": int(r.lead_days), "pairs": int(r.n),
             "crps_skill": None if not math.isfinite(r.crps_skill) else float(r.crps_skill)}
            for r in table.sort_values("lead_days").itertuples()]
    return {**out, "available": True, "by_lead": rows,
            "message": (f"Skill of the process model's forecasts of the last {WINDOW_DAYS} days against the "
                        f"readings that followed, by lead day.")}
