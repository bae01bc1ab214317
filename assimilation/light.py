"""Light limitation: Steele's curve, Beer–Lambert attenuation, Secchi depth.

[1] Steele, J.H. (1962) Environmental control of photosynthesis in the sea.
    Limnology and Oceanography 7:137–150.
[2] Di Toro, D.M., O'Connor, D.J. and Thomann, R.V. (1971) A dynamic model of
    the phytoplankton population in the Sacramento–San Joaquin Delta.
    Advances in Chemistry 106:131–180 (depth integral of Steele's curve).
[3] Chapra, S.C. (1997) Surface Water-Quality Modeling. McGraw-Hill, ch. 33.
"""
from __future__ import annotations

import numpy as np


def steele(irradiance, saturation):
    """Steele's photosynthesis–light curve f(I) = (I/Is)·exp(1 − I/Is). [-]

    irradiance and saturation (optimum) irradiance [W/m² PAR] (Steele 1962 [1]).
    """
    x = np.asarray(irradiance) / saturation
    return x * np.exp(1.0 - x)


def attenuation_coefficient(background, specific, chlorophyll):
    """Beer–Lambert attenuation with self-shading, k = k_bg + k_chl·ΣA. [1/m]

    background [1/m], specific [m²/mg chl-a], chlorophyll [µg/L = mg/m³]
    total over the groups (Chapra 1997 [3], ch. 33).
    """
    return background + specific * np.asarray(chlorophyll)


def steele_depth_average(surface_irradiance, saturation, attenuation, depth):
    """Steele's factor averaged over 0..H with I(z) = I0·exp(−k z). [-]

    surface_irradiance I0 and saturation Is [W/m² PAR], attenuation k [1/m],
    depth H [m]. Closed form (Di Toro et al. 1971 [2]; Chapra 1997 [3]):
    (e/(kH))·[exp(−(I0/Is)·exp(−kH)) − exp(−I0/Is)]. Broadcasts.
    """
    a0 = np.asarray(surface_irradiance) / saturation
    kh = np.asarray(attenuation) * depth
    with np.errstate(divide="ignore", invalid="ignore"):
        f = (np.e / kh) * (np.exp(-a0 * np.exp(-kh)) - np.exp(-a0))
    # Without attenuation the factor is the surface value at every depth.
    clear = kh <= 1e-12
    if np.any(clear):
        f = np.where(clear, steele(surface_irradiance, saturation), f)
    return f


def steele_depth_average_mean(surface_irradiance, weights, saturation, attenuation, depth):
    """Weighted mean over Q times of :func:`steele_depth_average`. [-]

    surface_irradiance (Q, ...) [W/m² PAR] at Q times (e.g. quadrature nodes
    over a time step), weights (Q,) [-]; saturation, attenuation [1/m] and
    depth [m] broadcast against each surface_irradiance[q] and do not change
    over the Q times. Same closed form as :func:`steele_depth_average`, with
    the attenuation terms computed once.
    """
    kh = np.asarray(attenuation) * depth
    if np.any(kh <= 1e-12):
        return sum(w * steele_depth_average(i0, saturation, attenuation, depth)
                   for w, i0 in zip(weights, surface_irradiance))
    bottom = np.exp(-kh)
    total = np.zeros(np.broadcast_shapes(np.shape(surface_irradiance[0]), np.shape(saturation), kh.shape))
    for w, i0 in zip(weights, surface_irradiance):
        if not np.any(i0):
            continue            # darkness adds nothing (night hours)
        a0 = i0 / saturation
        total += w * (np.exp(-a0 * bottom) - np.exp(-a0))
    return (np.e / kh) * total


def secchi_depth(attenuation, product=None):
    """Secchi depth from the attenuation coefficient, SD ≈ 1.7 / Kd. [m]

    attenuation [1/m]; product [-] Secchi depth × Kd (default the rule of
    thumb 1.7 in :mod:`assimilation.parameters`, after Poole & Atkins 1929,
    J. Mar. Biol. Assoc. UK 16:297).
    """
    if product is None:
        from assimilation.parameters import SECCHI_ATTENUATION_PRODUCT as product
    return product / np.asarray(attenuation)
