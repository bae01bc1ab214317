"""Quantities derived from the model state: nutrient totals, the network's
nitrogen and phosphorus budget, and the Secchi depth.

Total nitrogen and phosphorus count the dissolved inorganic nutrient, the
detrital (organic) nutrient and the nutrient bound in algae (chlorophyll-a
times the spec's nutrient-to-chlorophyll ratio), as a lab's total N or total
P after digestion does. The budget (:func:`mass_fluxes`) reuses the model's own process
fluxes (:func:`model.process_fluxes`), so it accounts for exactly the
processes the tendency integrates; its ``net`` equals d(total_mass)/dt
(checked in tests/assimilation/test_mass_balance.py).
"""
from __future__ import annotations

import numpy as np

from assimilation import hydraulics, light, model
from assimilation.forcing import Forcing, check_members
from assimilation.spec import NUTRIENT_SLOTS, ModelSpec, StateLayout

KG_PER_MG = 1e-6


def total_nitrogen(E: np.ndarray, spec: ModelSpec) -> np.ndarray:
    """Total nitrogen (DIN + detrital N + algal N) per basin [µg N/L], (..., B)."""
    layout = StateLayout(spec)
    return (layout.nitrogen(E) + layout.detrital_nitrogen(E)
            + spec.nitrogen_to_chlorophyll * layout.total_chlorophyll(E))


def total_phosphorus(E: np.ndarray, spec: ModelSpec) -> np.ndarray:
    """Total phosphorus (SRP + detrital P + algal P) per basin [µg P/L], (..., B)."""
    layout = StateLayout(spec)
    return (layout.phosphorus(E) + layout.detrital_phosphorus(E)
            + spec.phosphorus_to_chlorophyll * layout.total_chlorophyll(E))


def secchi_depth(E: np.ndarray, spec: ModelSpec) -> np.ndarray:
    """Secchi depth implied by the state, SD ≈ 1.7 / (k_bg + k_chl·ΣA) [m], (..., B).

    Beer–Lambert attenuation with self-shading (:mod:`light`) and the
    Poole–Atkins rule of thumb; for Carlson's TSI(SD) on the page.
    """
    layout = StateLayout(spec)
    k = light.attenuation_coefficient(spec.background_attenuation_per_m, spec.chlorophyll_attenuation_m2_mg,
                                      layout.total_chlorophyll(E))
    return light.secchi_depth(k)


def total_mass(E: np.ndarray, spec: ModelSpec) -> np.ndarray:
    """Total nitrogen and phosphorus in the whole network [kg], (..., 2).

    Changes at the rate ``mass_fluxes(...)["net"]``; N fixation is a source
    of the nitrogen total (the ``fixation`` term), not a transfer within it.
    """
    volume = np.array([b.volume_m3 for b in spec.basins])
    n = (total_nitrogen(E, spec) * volume).sum(axis=-1)
    p = (total_phosphorus(E, spec) * volume).sum(axis=-1)
    return np.stack([n, p], axis=-1) * KG_PER_MG


def mass_fluxes(E: np.ndarray, spec: ModelSpec, forcing: Forcing, params: dict | None = None) -> dict:
    """Mass fluxes of the network budget [kg/d], each (M, 2) for (N, P).

    Keys: ``inflow`` (external loads), ``outflow`` (leaving the system),
    ``settling`` (of algae), ``detritus_settling``, ``mortality_loss`` (the
    part of mortality neither recycled nor turned into detritus),
    ``denitrification`` (N only), ``fixation`` (N only, N2 fixed by
    nitrogen-fixing groups), ``sediment_release`` (P only) and ``net`` =
    inflow − outflow − settling − detritus_settling − mortality_loss −
    denitrification + fixation + sediment_release, which equals
    d(total_mass)/dt. Remineralisation and detritus formation move nutrient
    within the total and are not budget terms. E (M, n_state) [µg/L];
    forcing at one time (leading axis of length 1); params as in
    :func:`model.coefficients`.
    """
    layout = StateLayout(spec)
    E = np.asarray(E, dtype=float)
    M = E.shape[0]
    check_members(forcing, M)
    C = layout.blocks(E)
    co = model.coefficients(spec, params, M)
    T, par = forcing.water_temperature_C[0], forcing.par_W_m2[0]
    q, c_in = forcing.inflow_m3_s[0], forcing.inflow_concentration_ugL[0]
    stoich = np.array([co.n_to_chl, co.p_to_chl])
    S = NUTRIENT_SLOTS
    f = model.process_fluxes(C, co, T, par)                                   # [µg/L/d]

    def totals(conc):
        """(N, P) totals of concentrations (..., 4 + G): dissolved + detrital + algal [µg/L]."""
        return conc[..., :2] + conc[..., 2:S] + stoich * conc[..., S:].sum(axis=-1)[..., None]

    spd = hydraulics.SECONDS_PER_DAY
    inflow = np.broadcast_to((q[:, None] * totals(c_in)).sum(axis=0) * spd, (M, 2))
    Q = hydraulics.basin_outflows(spec.network, q) * spd                     # (B,) m³/d
    leaves = np.array([d == -1 for d in spec.network.downstream], dtype=float)
    outflow = ((Q * leaves)[:, None] * totals(C)).sum(axis=-2)
    V = co.volume_m3[:, None]
    settling = stoich * (f.settling.sum(axis=-1)[..., None] * V).sum(axis=-2)
    detritus_settling = (f.detritus_settling * V).sum(axis=-2)
    lost = (1.0 - co.detrital_fraction) * (1.0 - co.recycled)
    mortality_loss = stoich * lost * (f.mortality.sum(axis=-1)[..., None] * V).sum(axis=-2)
    release = np.zeros((M, 2))
    if co.any_release:
        release[:, 1] = (f.sediment_phosphorus * co.volume_m3).sum(axis=-1)
    denitrification = np.zeros((M, 2))
    if co.denitrification_20 > 0:
        denitrification[:, 0] = (f.denitrification * co.volume_m3).sum(axis=-1)
    fixation = np.zeros((M, 2))
    if co.any_fixing:
        fixation[:, 0] = co.n_to_chl * (f.fixed_growth.sum(axis=-1) * co.volume_m3).sum(axis=-1)
    out = {"inflow": inflow, "outflow": outflow, "settling": settling, "detritus_settling": detritus_settling,
           "mortality_loss": mortality_loss, "denitrification": denitrification, "fixation": fixation,
           "sediment_release": release}
    out = {k: np.asarray(v) * KG_PER_MG for k, v in out.items()}
    out["net"] = (out["inflow"] - out["outflow"] - out["settling"] - out["detritus_settling"]
                  - out["mortality_loss"] - out["denitrification"] + out["fixation"] + out["sediment_release"])
    return out
