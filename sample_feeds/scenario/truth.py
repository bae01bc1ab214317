"""The truth process: a box model of its own, richer than Bloomline's filter model.

Per basin: a surface-layer heat budget with wind-driven entrainment and autumn
overturn; nitrate N, SRP P and detrital N and P; chlorophyll-a of diatoms,
greens and cyanobacteria (Monod growth with Liebig's minimum, temperature and
light factors, N fixation, buoyancy, implicit grazing, sediment P release and
denitrification); transport down the chain with two-way exchange. Explicit
15-minute steps. It does not import Bloomline, so a demo forecast is honest.
"""
from __future__ import annotations

from functools import partial

import numpy as np

from .setting import BASINS, DT_D, EXCHANGE_M3S, GAUGE_INTO, NB

GROUPS = ("diatoms", "greens", "cyanobacteria")
MU_MAX_20 = np.array([1.45, 1.25, 0.58])        # [1/d]
THETA_GROWTH = np.array([1.04, 1.06, 1.13])     # [-] Arrhenius factor below the optimum
T_OPT = np.array([16.0, 23.0, 27.0])            # [°C] temperature optimum
T_WIDTH = np.array([7.0, 6.0, 5.0])             # [°C] Gaussian fall-off above the optimum
K_N = np.array([25.0, 20.0, 30.0])              # [µg N/L]
K_P = np.array([2.5, 2.0, 3.0])                 # [µg P/L]
I_SAT = np.array([35.0, 55.0, 45.0])            # [W/m² PAR] Steele optimum light
RESP_20 = np.array([0.08, 0.08, 0.07])          # [1/d] respiration + mortality
THETA_RESP = 1.08
SETTLING = np.array([0.6, 0.15, 0.0])           # [m/d] in calm water
EDIBLE = np.array([1.0, 0.8, 0.05])             # relative edibility for zooplankton
N_FIX_FLOOR = 0.60                              # cyanobacteria N-fixation floor on f_N [-]
CHL_TO_N = 50.0 / 5.7      # µg N per µg chl (C:chl 50, Redfield C:N 41:7.2 by mass)
CHL_TO_P = 50.0 / 41.0     # µg P per µg chl (C:chl 50, Redfield C:P 41:1 by mass)
K_CHL = 0.016              # chlorophyll-specific attenuation [m²/mg]
RECYCLED_FRACTION = 0.5    # share of losses returned at once to N and P
MINERALISATION_20 = 0.06   # detritus -> dissolved [1/d]
DETRITUS_SETTLING = 0.35   # [m/d]
ENTRAINMENT_PER_D = 0.12  # wind-driven exchange with the hypolimnion at 4 m/s [1/d]
THETA_SEDIMENT = 1.10      # temperature factor of sediment P release and denitrification
SEC_PER_D = 86400.0


def steele_depth_average(i0: np.ndarray, i_sat: np.ndarray, k: np.ndarray, h: np.ndarray) -> np.ndarray:
    """Steele (1962) photoinhibition averaged over depth 0..h with Beer-Lambert light. [-]

    Steele, J.H. (1962) Limnol. Oceanogr. 7:137; depth integral as in
    Chapra (1997) Surface Water-Quality Modeling, eq. 33.18.
    """
    kh = k * h
    a0 = i0 / i_sat
    return (np.e / kh) * (np.exp(-a0 * np.exp(-kh)) - np.exp(-a0))


def temperature_factor(temp: np.ndarray) -> np.ndarray:
    """Growth temperature factor per group: Arrhenius below T_opt, Gaussian above. [-]"""
    below = THETA_GROWTH ** (np.minimum(temp, T_OPT) - 20.0)
    above = np.exp(-(np.maximum(temp - T_OPT, 0.0) / T_WIDTH) ** 2)
    return below * above


def chain_transport(c: np.ndarray, c_in: np.ndarray, q_in: np.ndarray, through: np.ndarray,
                    vol: np.ndarray) -> np.ndarray:
    """Advection along the chain plus two-way exchange [units of c per day].

    ``c`` per basin, ``c_in`` per gauge (entering the basins of ``GAUGE_INTO``),
    ``q_in`` gauge flows [m³/s], ``through`` flow through each basin [m³/s],
    ``vol`` basin volumes [m³].
    """
    flux = np.zeros(NB)
    ext = np.zeros(NB)
    ext[list(GAUGE_INTO)] = q_in * c_in
    flux += ext
    flux[1] += through[0] * c[0]
    flux[2] += through[1] * c[1]
    flux -= through * c
    for (a, b), e in EXCHANGE_M3S.items():
        flux[a] += e * (c[b] - c[a])
        flux[b] += e * (c[a] - c[b])
    return flux * SEC_PER_D / vol


def run_truth(weather15: dict, inflow15: dict, season_day: np.ndarray) -> dict:
    """Integrate the truth box model with 15-minute explicit steps.

    Inputs per step: ``weather15`` from ``weather.weather_at_steps`` (air [°C],
    sw [W/m²], wind [m/s]), ``inflow15`` from ``inflows.inflows_at_steps`` and
    ``season_day`` [d since season start].

    Per basin: water temperature, nitrate N, SRP P, detrital N and P, and
    chlorophyll-a of diatoms, greens and cyanobacteria (all µg/L).
    Returns arrays of shape (steps, basins[, groups]) under the keys ``temp``
    [°C], ``nitrate``, ``srp``, ``det_p``, ``det_n`` and ``algae`` [µg/L].
    """
    vol = np.array([b.volume_m3 for b in BASINS])
    depth = np.array([b.depth_m for b in BASINS])
    h_mix = np.array([b.mixed_layer_m for b in BASINS])
    k_bg = np.array([b.k_background for b in BASINS])
    p_rel = np.array([b.p_release_20 for b in BASINS]) / depth        # [µg/L/d] at 20 °C
    denit = np.array([b.denitrification_20 for b in BASINS]) / depth  # [1/d] at 20 °C
    n_steps = len(season_day)
    sec_per_d = SEC_PER_D

    temp = np.array([11.0, 10.5, 9.8, 11.3])
    temp_deep = np.array([11.0, 8.5, 7.0, 11.3])
    hypo_share = (depth - h_mix) / depth
    nit = np.array([1600.0, 700.0, 560.0, 220.0])
    srp = np.array([14.0, 6.0, 4.0, 1.2])
    det_n = np.array([80.0, 50.0, 40.0, 30.0])
    det_p = np.array([8.0, 4.0, 3.0, 2.0])
    algae = np.array([[3.0, 0.8, 0.45], [2.5, 0.6, 0.25], [2.0, 0.5, 0.18], [1.5, 0.4, 0.10]])
    inflow_algae = np.array([0.3, 0.1, 0.01])

    out = {k: np.empty((n_steps, NB)) for k in ("temp", "nitrate", "srp", "det_p", "det_n")}
    out["algae"] = np.empty((n_steps, NB, len(GROUPS)))

    for step in range(n_steps):
        air = weather15["air"][step]
        sw = weather15["sw"][step]
        wind = weather15["wind"][step]
        day = season_day[step]

        # ---- heat budget of the surface mixed layer (linearised exchange coefficient)
        k_heat = 20.0 + 6.0 * wind                                     # [W/m²/K]
        q_net = 0.93 * sw - 95.0 + k_heat * (air - temp)               # [W/m²]
        q_in = inflow15["q"][step]                                      # per gauge [m³/s]
        t_in = inflow15["temp"][step]
        through = np.zeros(NB)   # total flow through each basin [m³/s]
        through[0] = q_in[0]
        through[1] = q_in[0] + q_in[1]
        through[2] = through[1]
        through[3] = q_in[2]

        transport = partial(chain_transport, q_in=q_in, through=through, vol=vol)   # (c, c_in)

        # surface-layer heat gain (rho*c_p = 4.18e6 J/m³/K) plus heat carried by the flows
        dtemp = q_net * sec_per_d / (4.18e6 * h_mix) + transport(temp, t_in)
        # wind-driven entrainment of cooler deep water where a hypolimnion exists
        entrain = ENTRAINMENT_PER_D * (wind / 4.0) ** 2 * hypo_share
        dtemp -= entrain * (temp - temp_deep)
        dtemp_deep = entrain * (temp - temp_deep) * h_mix / np.maximum(depth - h_mix, 1e-9) + 0.002

        # ---- light and mixing
        atot = algae.sum(axis=1)
        calm = np.exp(-wind / 2.5)                   # 1 in still air, -> 0 in wind
        flushing = through * sec_per_d / vol                       # dilution rate [1/d]
        k_ext = k_bg + 1.5 * flushing + K_CHL * atot                # storm turbidity + self-shading
        # surface mixed layer: shallower in calm weather, the whole column at autumn overturn
        overturn = np.exp(-np.maximum(temp - temp_deep, 0.0) / 1.5) * hypo_share
        z_mix = np.minimum(depth, 2.0 + (h_mix - 2.0) * (1.0 - 0.6 * calm)) + overturn * depth
        par = 0.45 * sw
        # buoyant cyanobacteria gather in the top layer in calm water
        z_light = np.stack([z_mix, z_mix, z_mix * (1.0 - 0.65 * calm)], axis=1)
        f_light = steele_depth_average(par, I_SAT[None, :], k_ext[:, None], z_light)

        # ---- growth
        f_t = temperature_factor(temp[:, None])
        f_n = nit[:, None] / (K_N + nit[:, None])
        f_n[:, 2] = np.maximum(f_n[:, 2], N_FIX_FLOOR)        # N fixation
        f_p = srp[:, None] / (K_P + srp[:, None])
        mu = MU_MAX_20 * f_t * f_light * np.minimum(f_n, f_p)  # [1/d]

        # ---- losses
        resp = RESP_20 * THETA_RESP ** (temp[:, None] - 20.0)
        resp[:, 2] += 0.10 * np.clip((13.0 - temp) / 3.0, 0.0, None)   # cold die-off of cyanobacteria
        # implicit zooplankton: a spring clear-water phase and summer grazing on edible algae
        zoo = 0.04 + 0.22 * np.exp(-0.5 * ((day - 45.0) / 12.0) ** 2) + 0.10 * np.exp(
            -0.5 * ((day - 105.0) / 30.0) ** 2)
        graze = zoo * 1.06 ** (temp[:, None] - 20.0) * EDIBLE
        settle = SETTLING[None, :] * (0.35 + 0.65 * calm) / depth[:, None]
        loss = resp + graze + settle

        growth = mu * algae
        lost = (resp + graze) * algae
        # N demand: cyanobacteria take from nitrate only the non-fixed share
        din_share = np.ones_like(mu)
        din_share[:, 2] = (nit / (K_N[2] + nit)) / np.maximum(nit / (K_N[2] + nit), N_FIX_FLOOR)
        n_uptake = (growth * din_share).sum(axis=1) * CHL_TO_N
        p_uptake = growth.sum(axis=1) * CHL_TO_P

        t_sed = THETA_SEDIMENT ** (temp - 20.0)
        miner = MINERALISATION_20 * 1.08 ** (temp - 20.0)
        p_release = p_rel * t_sed * (0.5 + 0.5 * calm)       # more release in calm (low-O2) spells

        dalg = growth - loss * algae + np.stack(
            [transport(algae[:, j], inflow_algae[j] * np.ones(3)) for j in range(3)], axis=1)
        recycled_n = RECYCLED_FRACTION * lost.sum(axis=1) * CHL_TO_N
        recycled_p = RECYCLED_FRACTION * lost.sum(axis=1) * CHL_TO_P
        dn = (-n_uptake + recycled_n + miner * det_n - denit * t_sed * nit
              + transport(nit, inflow15["nitrate"][step]))
        dp = (-p_uptake + recycled_p + miner * det_p + p_release
              + transport(srp, inflow15["srp"][step]))
        ddn = ((1 - RECYCLED_FRACTION) * lost.sum(axis=1) * CHL_TO_N - miner * det_n
               - DETRITUS_SETTLING / depth * det_n + transport(det_n, np.full(3, 60.0)))
        ddp = ((1 - RECYCLED_FRACTION) * lost.sum(axis=1) * CHL_TO_P - miner * det_p
               - DETRITUS_SETTLING / depth * det_p + transport(det_p, np.full(3, 6.0)))
        # explicit step, floored at small positive values (settled algae leave to the sediment)
        temp = temp + DT_D * dtemp
        temp_deep = np.where(hypo_share > 0, temp_deep + DT_D * dtemp_deep, temp)
        algae = np.maximum(algae + DT_D * dalg, 1e-4)
        nit = np.maximum(nit + DT_D * dn, 0.5)
        srp = np.maximum(srp + DT_D * dp, 0.05)
        det_n = np.maximum(det_n + DT_D * ddn, 0.0)
        det_p = np.maximum(det_p + DT_D * ddp, 0.0)

        out["temp"][step] = temp
        out["nitrate"][step] = nit
        out["srp"][step] = srp
        out["det_p"][step] = det_p
        out["det_n"][step] = det_n
        out["algae"][step] = algae
    return out
