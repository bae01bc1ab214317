"""Daily weather, storms and mixing of Brackenfold Mere for one season (the truth's forcing).

All series are daily and local (UTC+1). Weather noise is AR(1) day to day;
storms fall on random days drawn from the seed. The mere is polymictic: it
stratifies once the surface water passes ``STRATIFY_ABOVE_C`` and stays so
until the autumn overturn, except that every storm mixes it to the bottom
for two days and resets the oxygen clock of the deep water.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from .setting import LATITUDE_DEG, Season, season_days

SOLAR_CONSTANT_WM2 = 1367.0        # [W/m²] (Duffie & Beckman 1980)
CLEAR_TRANSMISSIVITY = 0.72        # [-] clear-sky share of the extraterrestrial shortwave (invented)
EQ_TEMP_MEAN_C = 11.0              # [°C] annual mean of the water's equilibrium temperature (invented)
EQ_TEMP_AMPLITUDE_C = 10.0         # [°C] its annual half-range (invented)
EQ_TEMP_PEAK_DOY = 205             # its warmest day of year (invented)
WATER_RESPONSE_D = 4.0             # [d] time constant of the water temperature (3.5 m mean depth)
STRATIFY_ABOVE_C = 15.5            # [°C] the mere stratifies once the surface water is this warm
OVERTURN_BELOW_C = 14.5            # [°C] after mid-August, cooler than this ends the stratification
ANOXIA_ONSET_D = 8.0               # [d] e-folding time of deep-water anoxia after a mixing
EXCHANGE_MIXED_PER_D = 2.5         # [1/d] surface–deep exchange while mixed
EXCHANGE_STRATIFIED_PER_D = 0.02   # [1/d] … and while stratified
OVERTURN_AFTER_DOY = 227           # mid-August: from then on cooling can end the stratification
MIN_STORM_SPACING_D = 14           # [d]
WIND_MEAN_MS = 3.2                 # [m/s] median daily wind on calm days (invented)
STORM_WIND_MS = 8.0                # [m/s] extra wind on a storm day per unit magnitude
STORM_COOLING_C = 3.0              # [°C] drop of the equilibrium temperature on a storm day per unit magnitude
STORM_TURBIDITY_PER_M = 0.8        # [1/m] extra attenuation from stirred-up sediment per unit magnitude …
TURBIDITY_DECAY_D = 2.0            # [d] … settling out with this e-folding time
SW_WARMING_C_PER_WM2 = 0.012       # [°C per W/m²] sunny days warm the water above its equilibrium


def extraterrestrial_daily_mean(doy: np.ndarray) -> np.ndarray:
    """Daily mean extraterrestrial shortwave on a horizontal surface [W/m²] at LATITUDE_DEG.

    Duffie, J.A. & Beckman, W.A. (1980) Solar Engineering of Thermal Processes,
    eqs. 1.10.3 (daily insolation), 1.6.1 (declination, Cooper 1969) and
    1.6.10 (sunset hour angle); divided by 24 h.
    """
    phi = np.radians(LATITUDE_DEG)
    decl = np.radians(23.45) * np.sin(2 * np.pi * (284 + doy) / 365.0)
    ws = np.arccos(np.clip(-np.tan(phi) * np.tan(decl), -1.0, 1.0))
    e0 = 1.0 + 0.033 * np.cos(2 * np.pi * doy / 365.0)
    return SOLAR_CONSTANT_WM2 / np.pi * e0 * (np.cos(phi) * np.cos(decl) * np.sin(ws) + ws * np.sin(phi) * np.sin(decl))


def ar1(rng: np.random.Generator, n: int, phi: float, sigma: float) -> np.ndarray:
    """Stationary AR(1) series of length n, lag-1 coefficient phi, marginal sd sigma (units of sigma)."""
    x = np.empty(n)
    x[0] = rng.normal(0.0, sigma)
    eps = rng.normal(0.0, sigma * np.sqrt(1.0 - phi * phi), n)
    for k in range(1, n):
        x[k] = phi * x[k - 1] + eps[k]
    return x


def storm_days(rng: np.random.Generator, n_days: int, n_storms: int) -> list[tuple[int, float]]:
    """Storms as (season day index, magnitude [-] in 0.6..1.4), at least MIN_STORM_SPACING_D apart.

    Days are drawn uniformly from day 10 to n_days − 10 by rejection, so a
    storm never falls at the very start or end of the season.
    """
    days: list[int] = []
    while len(days) < n_storms:
        d = int(rng.integers(10, n_days - 10))
        if all(abs(d - e) >= MIN_STORM_SPACING_D for e in days):
            days.append(d)
    return [(d, float(rng.uniform(0.6, 1.4))) for d in sorted(days)]


def make_forcing(rng: np.random.Generator, season: Season) -> tuple[pd.DataFrame, list[tuple[int, float]]]:
    """Daily forcing of ``season`` and its storms.

    Columns: date (local day), doy, shortwave_wm2 (daily mean at the surface
    [W/m²]), cloud [0..1], wind_ms (daily mean at 10 m [m/s]), water_temp_c
    (surface water daily mean [°C]), storm (magnitude, 0 on calm days),
    turbidity_per_m (storm-stirred extra light attenuation [1/m]),
    stratified (bool), days_since_mixing [d], anoxic_fraction [-] of the
    deep sediment, exchange_per_d (surface–deep exchange [1/d]).
    Cloud reduces clear-sky shortwave by Kasten & Czeplak (1980), Solar Energy
    24:177: G = G_clear · (1 − 0.75 · c^3.4).
    """
    days = season_days(season)
    n = len(days)
    doy = days.day_of_year.to_numpy(float)
    storms = storm_days(rng, n, season.storms)
    storm = np.zeros(n)
    for d, mag in storms:
        storm[d] = mag

    cloud = 1.0 / (1.0 + np.exp(-(0.3 + ar1(rng, n, 0.55, 1.4))))
    after = np.zeros(n)                  # storm influence on the day after, fading
    for d, mag in storms:
        cloud[d] = 1.0
        after[d + 1:d + 4] += mag * np.array([0.6, 0.3, 0.1])[: len(after[d + 1:d + 4])]
    shortwave = extraterrestrial_daily_mean(doy) * CLEAR_TRANSMISSIVITY * (1.0 - 0.75 * cloud ** 3.4)
    wind = WIND_MEAN_MS * np.exp(ar1(rng, n, 0.5, 0.3)) + STORM_WIND_MS * storm + 3.0 * after

    clear_sw = extraterrestrial_daily_mean(doy) * CLEAR_TRANSMISSIVITY
    t_eq = (EQ_TEMP_MEAN_C + EQ_TEMP_AMPLITUDE_C * np.cos(2 * np.pi * (doy - EQ_TEMP_PEAK_DOY) / 365.0)
            + SW_WARMING_C_PER_WM2 * (shortwave - 0.6 * clear_sw) + ar1(rng, n, 0.8, 1.6)
            - STORM_COOLING_C * (storm + 2.0 / 3.0 * after))
    water = np.empty(n)
    decay = np.exp(-1.0 / WATER_RESPONSE_D)
    # the season starts from the climatological equilibrium, half a degree cooler (spring lags)
    water[0] = EQ_TEMP_MEAN_C + EQ_TEMP_AMPLITUDE_C * np.cos(2 * np.pi * (doy[0] - EQ_TEMP_PEAK_DOY) / 365.0) \
        + rng.normal(-0.5, 0.5)
    for k in range(1, n):
        water[k] = t_eq[k] + (water[k - 1] - t_eq[k]) * decay

    turbidity = np.zeros(n)
    for d, mag in storms:
        turbidity[d:] += STORM_TURBIDITY_PER_M * mag * np.exp(-np.arange(n - d) / TURBIDITY_DECAY_D)

    onset = int(np.argmax(water >= STRATIFY_ABOVE_C)) if (water >= STRATIFY_ABOVE_C).any() else n
    late = (doy >= OVERTURN_AFTER_DOY) & (water < OVERTURN_BELOW_C)
    overturn = int(np.argmax(late)) if late.any() else n
    mixed_by_storm = np.zeros(n, dtype=bool)
    for d, _ in storms:
        mixed_by_storm[d:d + 2] = True
    stratified = (np.arange(n) >= onset) & (np.arange(n) < overturn) & ~mixed_by_storm
    since = np.zeros(n)
    for k in range(n):
        since[k] = since[k - 1] + 1.0 if (k > 0 and stratified[k]) else (1.0 if stratified[k] else 0.0)
    anoxic = np.where(stratified, 1.0 - np.exp(-since / ANOXIA_ONSET_D), 0.0)
    exchange = np.where(stratified, EXCHANGE_STRATIFIED_PER_D, EXCHANGE_MIXED_PER_D)

    frame = pd.DataFrame({"date": days, "doy": doy, "shortwave_wm2": shortwave, "cloud": cloud,
                          "wind_ms": wind, "water_temp_c": water, "storm": storm,
                          "turbidity_per_m": turbidity, "stratified": stratified,
                          "days_since_mixing": since, "anoxic_fraction": anoxic,
                          "exchange_per_d": exchange})
    return frame, storms
