"""The truth of Brackenfold Mere: a nutrient–phytoplankton–zooplankton model unlike Bloomline's.

State (surface layer unless said otherwise):

* ``N`` nitrate [µg N/L], ``P`` soluble reactive phosphorus [µg P/L];
* ``A`` phytoplankton carbon [µg C/L], one bulk community;
* ``Z`` zooplankton carbon [µg C/L] (Daphnia-like grazers);
* ``D`` detritus carbon [µg C/L], with N and P in Redfield proportion;
* ``H`` SRP of the deep water below the thermocline [µg P/L];
* ``S`` labile phosphorus in the sediment [mg P/m² of lake area];
* ``Q`` the phytoplankton's chlorophyll:carbon ratio [mg chl/mg C], which
  acclimates over ``ACCLIMATION_D`` to the ratio of Cloern, Grenz &
  Vidergar-Lucas (1995) for the day's temperature, light and nutrients.

Chlorophyll-a is ``chl = Q · A``: the ratio falls with light and rises with
temperature and nutrient sufficiency, so chlorophyll and biomass part ways.
The equations and parameters (all invented, in plausible ranges) are listed
in README.md in this folder. Integrated one local day at a time with
scipy's ``solve_ivp`` (LSODA), the day's forcing held constant; the state is
kept hourly. It does not import Bloomline.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.integrate import solve_ivp

from .setting import (
    AREA_M2,
    HYPOLIMNION_AREA_M2,
    HYPOLIMNION_DEPTH_M,
    HYPOLIMNION_VOLUME_FRACTION,
    MEAN_DEPTH_M,
    SURFACE_LAYER_M,
    Season,
)

STATE = ("N", "P", "A", "Z", "D", "H", "S", "Q")

# Phytoplankton
MU_MAX = 1.5                 # [1/d] maximum growth rate at the optimum temperature
T_MIN, T_OPT, T_MAX = 0.0, 25.0, 35.0   # [°C] cardinal temperatures of growth
I_K = 160.0                  # [µmol photons/m²/s] light saturation of the tanh curve
K_N = 25.0                   # [µg N/L] half-saturation for nitrate
K_P = 2.5                    # [µg P/L] half-saturation for SRP
RESP_20 = 0.10               # [1/d] respiration and lysis at 20 °C
THETA_LOSS = 1.06            # [-] temperature factor of losses
RESP_TO_DETRITUS = 0.6       # [-] share of the losses that becomes detritus (the rest is recycled at once)
SETTLING_A = 0.05            # [m/d] phytoplankton sinking
# Zooplankton
G_MAX_20 = 1.4               # [µg C/µg C/d] maximum grazing at 20 °C
THETA_GRAZING = 1.07         # [-]
K_GRAZING = 200.0            # [µg C/L] half-saturation of the Holling type III response
GROWTH_EFFICIENCY = 0.35     # [-] share of the grazed carbon built into zooplankton
EGESTED = 0.35               # [-] share egested as faecal pellets (detritus); the rest is excreted
Z_RESP_20 = 0.04             # [1/d] zooplankton respiration at 20 °C
PREDATION_SPRING = 1e-4      # [L/µg C/d] quadratic loss to fish before the young-of-year hatch
PREDATION_SUMMER = 6e-3      # [L/µg C/d] … and after it
PREDATION_RAMP_DOY = 168.0   # [day of year] middle of the hatch
PREDATION_RAMP_D = 5.0       # [d] its width
Z_HATCH = 0.6                # [µg C/L/d] hatching from resting eggs …
HATCH_UNTIL_DOY = 150        # … until this day of year
# Detritus, nutrients, sediment
REMIN_20 = 0.10              # [1/d] mineralisation of detritus at 20 °C
THETA_REMIN = 1.08           # [-]
SETTLING_D = 0.3             # [m/d] detritus sinking
N_TO_C = 16 * 14.007 / (106 * 12.011)   # [µg N/µg C] Redfield ratio by mass (≈ 0.176)
P_TO_C = 30.974 / (106 * 12.011)        # [µg P/µg C] Redfield ratio by mass (≈ 0.0243)
DENITRIFICATION_20 = 0.005   # [1/d] nitrate loss to the sediment at 20 °C
THETA_SEDIMENT = 1.08        # [-] temperature factor of sediment processes
SEDIMENT_RELEASE_20 = 0.05   # [1/d] mineralisation and release of labile sediment P at 20 °C
BURIAL = 0.004               # [1/d] labile sediment P buried for good
# Initial plankton and detritus [µg C/L]
A0_UGC_L, Z0_UGC_L, D0_UGC_L = 40.0, 5.0, 40.0
Q0 = 0.02                    # [mg chl/mg C] initial chlorophyll:carbon ratio
# Light
PAR_PER_SW = 0.45 * 4.57     # [µmol photons/J]: PAR share of shortwave × photons per joule (common practice)
K_WATER = 1.0                # [1/m] background attenuation (water, humic matter, clay)
K_CHL = 0.016                # [m²/mg chl] self-shading by chlorophyll (common practice)
# Chlorophyll:carbon (Cloern, Grenz & Vidergar-Lucas 1995)
CHL_C_MIN = 0.003            # [mg chl/mg C]
CHL_C_SCALE = 0.0154         # [mg chl/mg C]
CHL_C_TEMP = 0.050           # [1/°C]
CHL_C_LIGHT = 0.059          # [m² d/mol photons]
ACCLIMATION_D = 2.0          # [d] time scale of photoacclimation (invented)

_GL_X, _GL_W = np.polynomial.legendre.leggauss(8)


def cardinal_temperature(t: float) -> float:
    """Growth temperature factor [-] by the cardinal temperature model with inflection.

    Rosso, L., Lobry, J.R. & Flandrois, J.P. (1993) J. Theor. Biol. 162:447–463;
    1 at T_OPT, 0 at and outside T_MIN and T_MAX. t [°C].
    """
    if t <= T_MIN or t >= T_MAX:
        return 0.0
    num = (t - T_MAX) * (t - T_MIN) ** 2
    den = (T_OPT - T_MIN) * ((T_OPT - T_MIN) * (t - T_OPT) - (T_OPT - T_MAX) * (T_OPT + T_MIN - 2 * t))
    return num / den


def light_factor(par0: float, k: float, depth: float) -> float:
    """Jassby & Platt (1976) tanh(I/I_K) averaged over the layer 0..depth. [-]

    Jassby, A.D. & Platt, T. (1976) Limnol. Oceanogr. 21:540–547; Beer–Lambert
    light I(z) = par0·exp(−k z), par0 [µmol/m²/s], k [1/m], depth [m];
    Gauss–Legendre quadrature with 8 nodes.
    """
    z = 0.5 * depth * (_GL_X + 1.0)
    return float(0.5 * np.sum(_GL_W * np.tanh(par0 * np.exp(-k * z) / I_K)))


def chl_to_carbon(temp: float, mean_light_mol: float, nutrient: float) -> float:
    """Chlorophyll:carbon ratio [mg chl/mg C] of Cloern, Grenz & Vidergar-Lucas (1995).

    Limnol. Oceanogr. 40:1313–1321: θ = 0.003 + 0.0154·e^{0.050 T}·e^{−0.059 I}·μ',
    with T [°C], I the mean light in the mixed layer [mol photons/m²/d] and μ'
    the nutrient-limited share of growth [-] (coefficients from memory).
    """
    return CHL_C_MIN + CHL_C_SCALE * np.exp(CHL_C_TEMP * temp) * np.exp(-CHL_C_LIGHT * mean_light_mol) * nutrient


def predation(doy: float) -> float:
    """Quadratic zooplankton loss to fish [L/µg C/d], rising as young-of-year fish start feeding."""
    ramp = 1.0 / (1.0 + np.exp(-(doy - PREDATION_RAMP_DOY) / PREDATION_RAMP_D))
    return PREDATION_SPRING + (PREDATION_SUMMER - PREDATION_SPRING) * ramp


def _layer(day, chl: float) -> dict:
    """The day's light in the mixed layer with chlorophyll-a ``chl`` [µg/L] shading it.

    Plankton circulate through the surface layer while the mere is stratified
    and through the whole depth while it is mixed.
    """
    depth = SURFACE_LAYER_M if day["stratified"] else MEAN_DEPTH_M
    k = K_WATER + day["turbidity_per_m"] + K_CHL * chl
    par0 = PAR_PER_SW * day["shortwave_wm2"]
    mean_par = par0 * (1.0 - np.exp(-k * depth)) / (k * depth)
    return {"depth": depth, "k": k, "par0": par0, "mean_light_mol": mean_par * 0.0864}


def rhs(_t: float, y: np.ndarray, day, season: Season) -> np.ndarray:
    """Tendencies of (N, P, A, Z, D, H) [µg/L/d], S [mg P/m²/d] and Q [1/d] under one day's forcing ``day``
    (a row of ``forcing.make_forcing``: a mapping from column to value)."""
    n, p, a, z, d, h, sed, q = np.maximum(y, 0.0)
    temp = day["water_temp_c"]
    layer = _layer(day, q * a)
    f_nut = (n / (K_N + n)) * (p / (K_P + p))
    dq = (chl_to_carbon(temp, layer["mean_light_mol"], f_nut) - q) / ACCLIMATION_D
    growth = MU_MAX * cardinal_temperature(temp) * light_factor(layer["par0"], layer["k"], layer["depth"]) * f_nut * a
    loss_factor = THETA_LOSS ** (temp - 20.0)
    resp = RESP_20 * loss_factor * a
    sink_a = SETTLING_A / SURFACE_LAYER_M * a
    grazing = G_MAX_20 * THETA_GRAZING ** (temp - 20.0) * a * a / (K_GRAZING ** 2 + a * a) * z
    z_resp = Z_RESP_20 * loss_factor * z
    eaten = predation(day["doy"]) * z * z
    hatch = Z_HATCH if day["doy"] < HATCH_UNTIL_DOY else 0.0
    remin = REMIN_20 * THETA_REMIN ** (temp - 20.0) * d
    sink_d = SETTLING_D / SURFACE_LAYER_M * d
    recycled_c = (1.0 - RESP_TO_DETRITUS) * resp + (1.0 - GROWTH_EFFICIENCY - EGESTED) * grazing + z_resp + remin
    sediment = THETA_SEDIMENT ** (temp - 20.0)
    deep_share = HYPOLIMNION_AREA_M2 / AREA_M2
    littoral = SEDIMENT_RELEASE_20 * sediment * (1.0 - deep_share) * sed      # [mg P/m²/d] into the surface layer
    deep = SEDIMENT_RELEASE_20 * sediment * deep_share * sed * day["anoxic_fraction"]  # into the deep water
    legacy = season.anoxic_release_20 * sediment * day["anoxic_fraction"]    # [mg P/m²/d of deep sediment]
    v_ratio = HYPOLIMNION_VOLUME_FRACTION / (1.0 - HYPOLIMNION_VOLUME_FRACTION)
    exchange = day["exchange_per_d"] * (h - p)
    dn = -N_TO_C * growth + N_TO_C * recycled_c + season.nitrate_load - DENITRIFICATION_20 * sediment * n
    dp = -P_TO_C * growth + P_TO_C * recycled_c + littoral / SURFACE_LAYER_M + v_ratio * exchange
    da = growth - resp - sink_a - grazing
    dz = GROWTH_EFFICIENCY * grazing - z_resp - eaten + hatch
    dd = RESP_TO_DETRITUS * resp + EGESTED * grazing + eaten - remin - sink_d
    dh = (deep * AREA_M2 / HYPOLIMNION_AREA_M2 + legacy) / HYPOLIMNION_DEPTH_M - exchange
    dsed = P_TO_C * (sink_a + sink_d) * SURFACE_LAYER_M - littoral - deep - BURIAL * sed
    return np.array([dn, dp, da, dz, dd, dh, dsed, dq])


def initial_state(season: Season) -> np.ndarray:
    """Spring state at the season start: mixed water, small phytoplankton and grazer stocks."""
    return np.array([season.nitrate0_ugL, season.srp0_ugL, A0_UGC_L, Z0_UGC_L, D0_UGC_L, season.srp0_ugL,
                     season.sediment_p0_mg_m2, Q0])


def run_truth(forcing: pd.DataFrame, season: Season) -> np.ndarray:
    """Hourly truth states, shape (24·days + 1, 8) in STATE order, from local midnight of the first day.

    Each local day is one ``solve_ivp`` call (LSODA, rtol 1e-7, atol 1e-9)
    with that day's forcing held constant; the dense output gives the hours.
    """
    y = initial_state(season)
    out = [y]
    hours = np.arange(1, 25) / 24.0
    for day in forcing.to_dict("records"):   # plain dicts: the right-hand side reads them often
        sol = solve_ivp(rhs, (0.0, 1.0), y, method="LSODA", args=(day, season), rtol=1e-7, atol=1e-9,
                        dense_output=True)
        if not sol.success:
            raise RuntimeError(f"truth integration failed on {day['date']:%Y-%m-%d}: {sol.message}")
        states = np.maximum(sol.sol(hours).T, 0.0)
        out.extend(states)
        y = states[-1]
    return np.array(out)


def diagnostics(states: np.ndarray) -> dict:
    """Chlorophyll-a, total phosphorus and the nutrient factor of states (…, 8) in STATE order.

    Returns chl_a [µg/L], total_phosphorus [µg P/L] (SRP + P in phytoplankton,
    zooplankton and detritus) and nutrient_factor [-] (the product of the
    Monod terms for nitrate and SRP).
    """
    s = np.maximum(np.atleast_2d(states), 0.0)
    n, p, a, z, d, q = s[:, 0], s[:, 1], s[:, 2], s[:, 3], s[:, 4], s[:, 7]
    return {"chl_a": q * a, "nutrient_factor": (n / (K_N + n)) * (p / (K_P + p)),
            "total_phosphorus": p + P_TO_C * (a + z + d)}
