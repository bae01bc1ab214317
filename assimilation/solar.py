"""Clear-sky shortwave radiation from astronomy, for water bodies without a weather feed.

Extraterrestrial irradiance on a horizontal surface from the solar
declination, the inverse relative Earth–Sun distance and the hour angle,
with the equation of time (Allen, Pereira, Raes & Smith 1998, *Crop
Evapotranspiration*, FAO Irrigation and Drainage Paper 56, eqs. 21–25 and
31–33); surface shortwave by the Ångström–Prescott relation
Rs = (a_s + b_s·n/N)·Ra with FAO-56's default a_s = 0.25, b_s = 0.50 (eq. 35)
and a climatological relative sunshine duration n/N.
"""

from __future__ import annotations

import numpy as np

SOLAR_CONSTANT_W_M2 = 1367.0          # Gsc = 0.0820 MJ m⁻² min⁻¹ (FAO-56)
ANGSTROM_A = 0.25
ANGSTROM_B = 0.50
#: Relative sunshine duration n/N of a typical temperate summer (common practice; a water body
#: without a weather feed has no better estimate).
CLIMATOLOGICAL_SUNSHINE_FRACTION = 0.5


def _day_of_year(time_d: np.ndarray) -> np.ndarray:
    days = np.floor(time_d).astype("int64").astype("datetime64[D]")
    return (days - days.astype("datetime64[Y]")).astype(int) + 1.0


def extraterrestrial_W_m2(time_d, latitude_deg: float, longitude_deg: float = 0.0) -> np.ndarray:
    """Extraterrestrial irradiance on a horizontal surface at each time [W/m²].

    time_d [epoch days, UTC]; latitude [° N, −90..90]; longitude [° E]. Zero at night.
    """
    time_d = np.asarray(time_d, dtype=float)
    if not -90.0 <= latitude_deg <= 90.0:
        raise ValueError(f"latitude must lie in [-90, 90] degrees, got {latitude_deg}")
    J = _day_of_year(time_d)
    dr = 1.0 + 0.033 * np.cos(2 * np.pi * J / 365.0)                        # FAO-56 eq. 23
    decl = 0.409 * np.sin(2 * np.pi * J / 365.0 - 1.39)                     # eq. 24
    b = 2 * np.pi * (J - 81.0) / 364.0                                      # eq. 33
    equation_of_time_h = 0.1645 * np.sin(2 * b) - 0.1255 * np.cos(b) - 0.025 * np.sin(b)  # eq. 32
    utc_hours = (time_d - np.floor(time_d)) * 24.0
    solar_hours = utc_hours + longitude_deg / 15.0 + equation_of_time_h
    omega = np.pi / 12.0 * (solar_hours - 12.0)                             # eq. 31, hour angle
    phi = np.radians(latitude_deg)
    cos_zenith = np.sin(phi) * np.sin(decl) + np.cos(phi) * np.cos(decl) * np.cos(omega)
    return SOLAR_CONSTANT_W_M2 * dr * np.clip(cos_zenith, 0.0, None)


def daily_extraterrestrial_MJ_m2(day_of_year, latitude_deg: float) -> np.ndarray:
    """Daily extraterrestrial radiation Ra [MJ m⁻² d⁻¹] (FAO-56 eq. 21, with eqs. 23–25)."""
    J = np.asarray(day_of_year, dtype=float)
    phi = np.radians(latitude_deg)
    dr = 1.0 + 0.033 * np.cos(2 * np.pi * J / 365.0)
    decl = 0.409 * np.sin(2 * np.pi * J / 365.0 - 1.39)
    ws = np.arccos(np.clip(-np.tan(phi) * np.tan(decl), -1.0, 1.0))          # eq. 25
    return 24 * 60 / np.pi * 0.0820 * dr * (ws * np.sin(phi) * np.sin(decl) + np.cos(phi) * np.cos(decl) * np.sin(ws))


def clear_sky_shortwave_W_m2(time_d, latitude_deg: float, longitude_deg: float = 0.0,
                             sunshine_fraction: float = CLIMATOLOGICAL_SUNSHINE_FRACTION) -> np.ndarray:
    """Surface shortwave [W/m²] at each time: (a_s + b_s·n/N) × extraterrestrial (FAO-56 eq. 35)."""
    if not 0.0 <= sunshine_fraction <= 1.0:
        raise ValueError(f"sunshine_fraction must lie in [0, 1], got {sunshine_fraction}")
    return (ANGSTROM_A + ANGSTROM_B * sunshine_fraction) * extraterrestrial_W_m2(time_d, latitude_deg, longitude_deg)
