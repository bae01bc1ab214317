"""The fixed setting of Brackenfold Mere: the lake, its sampling site and the two seasons.

Everything here is invented. Brackenfold Mere is a small closed-basin lake
(no inflow, no outflow stream) used for recreation, with one sampling site
``BF-SITE``. Local time is fixed at UTC+1 (IANA ``Etc/GMT-1``), with no
daylight saving. A season runs mid-April to mid-October.
"""
from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

# The lake (one basin) [m³, m, m²]
WATER_BODY = "brackenfold"
SITE = "BF-SITE"
VOLUME_M3 = 1.8e6
MEAN_DEPTH_M = 3.5
AREA_M2 = 5.1e5
LATITUDE_DEG = 54.0                 # invented site in a cool-temperate climate
TIMEZONE = "Etc/GMT-1"              # UTC+1 all year

# Two layers while the mere is stratified: the surface layer holds the plankton,
# the deep hollow below it collects phosphorus released by anoxic sediment.
HYPOLIMNION_VOLUME_FRACTION = 0.20  # [-] share of the lake volume below the thermocline
HYPOLIMNION_AREA_M2 = 1.6e5         # [m²] sediment area under the hypolimnion
SURFACE_LAYER_M = (1.0 - HYPOLIMNION_VOLUME_FRACTION) * VOLUME_M3 / AREA_M2   # [m] ≈ 2.8
HYPOLIMNION_DEPTH_M = HYPOLIMNION_VOLUME_FRACTION * VOLUME_M3 / HYPOLIMNION_AREA_M2  # [m] ≈ 2.25


@dataclass(frozen=True)
class Season:
    """One monitored season and how fertile the mere is that year.

    ``nitrate0_ugL`` and ``srp0_ugL`` are the spring (fully mixed) concentrations
    [µg N/L, µg P/L] at the season start; ``anoxic_release_20`` the phosphorus
    release of anoxic sediment under the hypolimnion at 20 °C [mg P/m²/d];
    ``nitrate_load`` the diffuse nitrate input by groundwater seepage and rain
    [µg N/L/d]; ``sediment_p0_mg_m2`` the labile sediment phosphorus at the
    season start [mg P/m²]; ``storms`` the number of storms in the season.
    """

    year: int
    start: pd.Timestamp          # first local day
    end: pd.Timestamp            # last local day (inclusive)
    label: str
    nitrate0_ugL: float
    srp0_ugL: float
    anoxic_release_20: float
    nitrate_load: float
    sediment_p0_mg_m2: float
    storms: int


SEASONS = (
    # 2025: a moderate year; 2026: the fields round the mere were newly fertilised
    # (slurry spread over the winter) and more phosphorus reached the water and sediment.
    Season(2025, pd.Timestamp("2025-04-15"), pd.Timestamp("2025-10-15"), "moderate",
           nitrate0_ugL=900.0, srp0_ugL=25.0, anoxic_release_20=4.0, nitrate_load=5.0,
           sediment_p0_mg_m2=30.0, storms=5),
    Season(2026, pd.Timestamp("2026-04-15"), pd.Timestamp("2026-10-15"), "fertilised",
           nitrate0_ugL=2200.0, srp0_ugL=50.0, anoxic_release_20=10.0, nitrate_load=10.0,
           sediment_p0_mg_m2=120.0, storms=5),
)


def season_days(season: Season) -> pd.DatetimeIndex:
    """The local days of ``season``, one per day from start to end inclusive."""
    return pd.date_range(season.start, season.end, freq="D")
