"""Carlson's trophic state index from Secchi depth, chlorophyll-a and total phosphorus.

[1] Carlson, R.E. (1977) A trophic state index for lakes. Limnology and
    Oceanography 22:361–369 (natural-log form below).
"""
from __future__ import annotations

import numpy as np


def _positive(name, value):
    value = np.asarray(value, dtype=float)
    if np.any(~(value > 0)):
        raise ValueError(f"{name} must be positive (and not NaN), got {value}")
    return value


def tsi_secchi(secchi_m):
    """TSI(SD) = 60 − 14.41·ln SD. [-]  secchi_m [m] (Carlson 1977 [1])."""
    return 60.0 - 14.41 * np.log(_positive("secchi_m", secchi_m))


def tsi_chlorophyll(chl_ugL):
    """TSI(Chl) = 9.81·ln Chl + 30.6. [-]  chl_ugL chlorophyll-a [µg/L] (Carlson 1977 [1])."""
    return 9.81 * np.log(_positive("chl_ugL", chl_ugL)) + 30.6


def tsi_total_phosphorus(tp_ugL):
    """TSI(TP) = 14.42·ln TP + 4.15. [-]  tp_ugL total phosphorus [µg P/L] (Carlson 1977 [1])."""
    return 14.42 * np.log(_positive("tp_ugL", tp_ugL)) + 4.15


def trophic_class(tsi) -> str:
    """Trophic class of one TSI value: "oligotrophic", "mesotrophic",
    "eutrophic" or "hypereutrophic" (boundaries 40, 50, 70; a value on a
    boundary belongs to the class above it, 70 itself is eutrophic)."""
    value = float(tsi)
    if not np.isfinite(value):
        raise ValueError(f"tsi must be a finite number, got {tsi!r}")
    if value < 40.0:
        return "oligotrophic"
    if value < 50.0:
        return "mesotrophic"
    if value <= 70.0:
        return "eutrophic"
    return "hypereutrophic"
