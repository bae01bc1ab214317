"""Weekly lab samples drawn from the truth: nutrients, extracted chlorophyll-a, microcystin."""
from __future__ import annotations

import numpy as np
import pandas as pd

from .formatting import LOCAL_MINUTES
from .setting import SEASON_END_LOCAL, STEP_MIN
from .truth import CHL_TO_P

# (site, basin index, planned local time) in the order of the sampling route
LAB_ROUTE = (("CR-FA", 0, "09:00"), ("CR-MR", 1, "09:45"), ("CR-DB", 2, "10:30"), ("SL-01", 3, "13:30"))
LAB_SKIPPED = (pd.Timestamp("2026-05-26"),)     # a holiday week without sampling
MICROCYSTIN_DETECTION_UGL = 0.1                 # below it the lab writes "<0.1"


def make_lab(rng: np.random.Generator, truth: dict, local: pd.DatetimeIndex) -> pd.DataFrame:
    """Weekly Tuesday samples at each site: nitrate, SRP, TP, extracted chl-a, microcystin.

    ``truth`` is the output of ``truth.run_truth`` at the local 15-minute times
    ``local``. Returns long-format rows sampled_at (local), site, variable,
    value (text) and unit: nitrate [mg N/L], the others [µg/L].
    """
    tuesdays = pd.date_range("2026-05-05", SEASON_END_LOCAL.normalize(), freq="7D")
    rows = []
    start = local[0]
    for day in tuesdays:
        if day in LAB_SKIPPED:
            continue
        for site, b, hhmm in LAB_ROUTE:
            t = day + pd.Timedelta(hhmm + ":00") + pd.Timedelta(minutes=5 * int(rng.integers(0, 5)))
            k = int((t - start) / pd.Timedelta(minutes=STEP_MIN))
            algae = truth["algae"][k, b]
            chl_tot = algae.sum()
            tp = truth["srp"][k, b] + CHL_TO_P * chl_tot + truth["det_p"][k, b]
            nitrate = truth["nitrate"][k, b] / 1000.0 * np.exp(rng.normal(0, 0.05))
            srp = max(truth["srp"][k, b] * np.exp(rng.normal(0, 0.10)) + rng.normal(0, 0.3), 0.2)
            tp = tp * np.exp(rng.normal(0, 0.08))
            chla = chl_tot * max(1.0 + rng.normal(0, 0.10), 0.5)
            quota = 0.10 + 0.08 * np.sin(np.pi * np.clip((t - start).days / 184.0, 0, 1))
            mc = algae[2] * quota * np.exp(rng.normal(0, 0.3))
            ts = t.strftime(LOCAL_MINUTES)
            mc_text = f"<{MICROCYSTIN_DETECTION_UGL}" if mc < MICROCYSTIN_DETECTION_UGL else f"{mc:.2f}"
            rows += [(ts, site, "nitrate", f"{nitrate:.3f}", "mg/L"),
                     (ts, site, "srp", f"{srp:.1f}", "ug/L"),
                     (ts, site, "total_phosphorus", f"{tp:.1f}", "ug/L"),
                     (ts, site, "chlorophyll_a", f"{chla:.2f}", "ug/L"),
                     (ts, site, "microcystin", mc_text, "ug/L")]
    return pd.DataFrame(rows, columns=["sampled_at", "site", "variable", "value", "unit"])
