"""Phytoplankton growth, temperature response and losses.

All functions are elementwise and broadcast over (members, basins, groups).

[1] Monod, J. (1950) La technique de culture continue, théorie et
    applications. Annales de l'Institut Pasteur 79:390–410.
[2] Eppley, R.W. (1972) Temperature and phytoplankton growth in the sea.
    Fishery Bulletin 70:1063–1085.
[3] Chapra, S.C. (1997) Surface Water-Quality Modeling. McGraw-Hill, ch. 33.
[4] Bowie, G.L. et al. (1985) Rates, Constants, and Kinetics Formulations in
    Surface Water Quality Modeling, 2nd ed. US EPA, EPA/600/3-85/040.
[5] Janse, J.H. (2005) Model studies on the eutrophication of shallow lakes
    and ditches. PhD thesis, Wageningen University (PCLake); Hipsey, M.R. et
    al. (2013) CAEDYM v3 Science Manual, University of Western Australia
    (N limitation of fixers with a floor; formulation as recalled, from memory).
[6] Hense, I. and Beckmann, A. (2006) Ecological Modelling 195:205–218
    (slower growth as the energetic cost of N2 fixation).
"""
from __future__ import annotations

import numpy as np


def temperature_factor(theta, temperature):
    """Arrhenius temperature factor theta**(T − 20). [-]

    theta [-], temperature [°C]. The form of Eppley (1972) [2] and of the
    rate compilations [3], [4].
    """
    return np.power(theta, np.asarray(temperature) - 20.0)


def monod(concentration, half_saturation):
    """Monod saturation term S / (K + S). [-]

    concentration and half_saturation [µg/L]; one half at S = K (Monod 1950 [1]).
    """
    return concentration / (half_saturation + concentration)


def nutrient_limitation(nitrogen, phosphorus, k_n, k_p):
    """Liebig's minimum over Monod terms for DIN and SRP. [-]

    nitrogen, phosphorus [µg/L]; k_n, k_p half-saturation [µg/L] (Chapra 1997 [3], ch. 33).
    """
    return np.minimum(monod(nitrogen, k_n), monod(phosphorus, k_p))


def nitrogen_limitation_with_fixation(nitrogen, k_n, fixation_floor):
    """Nitrogen limitation of a group that may fix N2, and its DIN share. [-]

    nitrogen [µg N/L] dissolved inorganic N, k_n [µg N/L] half-saturation,
    fixation_floor [-] the growth fraction a fixer keeps without DIN (0 for a
    group that does not fix). Returns (f_n, din_share):
    f_n = max(N/(K_N + N), floor) is the N term of Liebig's minimum, and
    din_share = (N/(K_N + N)) / f_n the part of the group's N demand taken
    from DIN; the rest, 1 − din_share, is fixed from dissolved N2. For a
    non-fixer f_n is the Monod term and din_share is one. The floor form
    of PCLake / CAEDYM [5], with the floor below one as the cost of
    fixation [6].
    """
    f_din = monod(nitrogen, k_n)
    f_n = np.maximum(f_din, fixation_floor)
    din_share = np.where(f_n > 0, f_din / np.where(f_n > 0, f_n, 1.0), 1.0)
    return f_n, din_share


def growth_rate(mu_max_20, theta, temperature, f_light, nitrogen, phosphorus, k_n, k_p):
    """Specific growth rate of each group. [1/d]

    mu_max_20 [1/d] at 20 °C, theta [-], temperature [°C], f_light [-],
    nitrogen and phosphorus [µg/L], k_n and k_p half-saturation [µg/L].
    Arrays broadcast over (members, basins, groups).

    Monod kinetics with Liebig's minimum and an Arrhenius temperature factor
    (Eppley 1972 [2]; Chapra 1997 [3], ch. 33).
    """
    f_nutrient = nutrient_limitation(nitrogen, phosphorus, k_n, k_p)
    return mu_max_20 * temperature_factor(theta, temperature) * f_light * f_nutrient


def mortality_rate(mortality_20, theta, temperature):
    """Specific mortality + respiration rate. [1/d]

    mortality_20 [1/d] at 20 °C, theta [-], temperature [°C] (first-order loss
    with Arrhenius temperature dependence, Bowie et al. 1985 [4]).
    """
    return mortality_20 * temperature_factor(theta, temperature)


def settling_rate(settling_velocity, depth):
    """Specific settling loss v / z. [1/d]

    settling_velocity [m/d], depth [m] (Chapra 1997 [3]).
    """
    return settling_velocity / depth


def sediment_phosphorus_release(release_20, theta, temperature, depth):
    """Internal phosphorus loading as a source in the water column. [µg P/L/d]

    release_20 [mg P/m²/d] at 20 °C, theta [-], temperature [°C], depth [m]
    (area flux divided by depth; mg/m³ = µg/L). Temperature-driven release
    in the Arrhenius form of Bowie et al. (1985) [4].
    """
    return release_20 * temperature_factor(theta, temperature) / depth


def remineralisation_rate(rate_20, theta, temperature):
    """Specific remineralisation rate of detrital (organic) N or P to DIN or SRP. [1/d]

    rate_20 [1/d] at 20 °C, theta [-], temperature [°C]: first-order decay
    of the organic pool with Arrhenius temperature dependence (organic N
    hydrolysis and organic P mineralisation, Chapra 1997 [3], ch. 33;
    rates compiled in Bowie et al. 1985 [4]).
    """
    return rate_20 * temperature_factor(theta, temperature)


def denitrification_rate(rate_20, theta, temperature):
    """Specific denitrification rate of dissolved inorganic nitrogen. [1/d]

    rate_20 [1/d] at 20 °C, theta [-], temperature [°C]: first-order loss
    with Arrhenius temperature dependence (Chapra 1997 [3], ch. 28).
    """
    return rate_20 * temperature_factor(theta, temperature)
