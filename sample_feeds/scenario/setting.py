"""The scenario's fixed setting: season calendar, basins, gauges and the hydraulic chain.

Everything here is invented. Local time is fixed at UTC+2 (IANA ``Etc/GMT-2``),
with no daylight saving.
"""
from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

# Calendar
LOCAL_OFFSET = pd.Timedelta(hours=2)
SEASON_START_LOCAL = pd.Timestamp("2026-05-01 00:00")
SEASON_END_LOCAL = pd.Timestamp("2026-10-31 23:45")
STEP_MIN = 15
STEPS_PER_DAY = 96
DT_D = 1.0 / STEPS_PER_DAY              # model step [d]
FORECAST_HOURS = 168                    # 7-day forecast, hourly
LATITUDE_DEG = 51.0                     # invented site, central-European climate
LONGITUDE_DEG = 10.0


@dataclass(frozen=True)
class Basin:
    """One well-mixed basin of the truth model and the buoy site in it."""

    water_body: str
    basin: str
    site: str
    volume_m3: float
    depth_m: float          # mean depth [m]
    area_m2: float
    mixed_layer_m: float    # surface layer exchanging heat with the air [m]
    k_background: float     # non-algal light attenuation [1/m]
    p_release_20: float     # sediment SRP release at 20 °C [mg P/m²/d]
    denitrification_20: float  # sediment nitrate loss velocity at 20 °C [m/d]


# Basins in state-vector order.
BASINS = (
    Basin("corrisdale", "fennick-arm", "CR-FA", 4.0e6, 4.0, 1.0e6, 4.0, 0.85, 14.0, 0.08),
    Basin("corrisdale", "middle-reach", "CR-MR", 12.0e6, 8.0, 1.5e6, 6.0, 0.60, 2.2, 0.04),
    Basin("corrisdale", "dam-basin", "CR-DB", 20.0e6, 15.0, 1.33e6, 7.0, 0.45, 1.0, 0.03),
    Basin("sorrel-lake", "main", "SL-01", 1.5e6, 3.0, 0.5e6, 3.0, 0.50, 0.20, 0.03),
)
NB = len(BASINS)
GAUGES = ("FB-GAUGE", "TB-GAUGE", "SC-GAUGE")   # Fennick Brook, Tarn Beck, Sorrel Creek
GAUGE_INTO = (0, 1, 3)                         # basin index each gauge enters
# downstream[i] = basin receiving basin i's outflow (-1: leaves the system)
DOWNSTREAM = (1, 2, -1, -1)
EXCHANGE_M3S = {(0, 1): 0.35, (1, 2): 0.6}     # two-way mixing between connected basins [m³/s]
