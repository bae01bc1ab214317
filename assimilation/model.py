"""The nutrient–phytoplankton–detritus process fluxes and tendency function.

Per basin b (a well-mixed box, volume V_b, mean depth z_b) and group g,
with N dissolved inorganic nitrogen, P soluble reactive phosphorus, D_N and
D_P detrital (organic) nitrogen and phosphorus and A_g chlorophyll-a [µg/L]:

    growth   mu_g = mu_max_g·theta_g^(T−20)·f_light,g·min(f_N,g, P/(K_P,g+P))
    f_N,g    = max(N/(K_N,g+N), phi_g),  s_g = (N/(K_N,g+N)) / f_N,g
    dA_g/dt  = (mu_g − m_g(T) − v_g/z_b)·A_g                                    + transport
    dN/dt    = −a_N·Σ s_g mu_g A_g + r·a_N·Σ m_g A_g + k_N(T)·D_N − k_dn(T)·N    + transport
    dP/dt    = −a_P·Σ mu_g A_g + r·a_P·Σ m_g A_g + k_P(T)·D_P + J_sed,b(T)/z_b + transport
    dD_N/dt  = d·(1 − r)·a_N·Σ m_g A_g − (k_N(T) + v_D/z_b)·D_N                 + transport
    dD_P/dt  = d·(1 − r)·a_P·Σ m_g A_g − (k_P(T) + v_D/z_b)·D_P                 + transport

a_N, a_P nutrient per chlorophyll (carbon:chlorophyll × Redfield), r the
recycled fraction, d the detrital fraction of the rest ((1 − d)(1 − r) of
mortality leaves the water column at once), m_g temperature-dependent
mortality + respiration, v_g settling velocity, k_N, k_P remineralisation
rates and v_D the settling velocity of detritus, J_sed,b the internal
phosphorus loading of basin b, k_dn denitrification.
phi_g is the fixation floor of a nitrogen-fixing group (its
``fixation_growth_fraction``, zero for other groups) and s_g the share of
its N demand taken from DIN; the rest, a_N·Σ (1 − s_g) mu_g A_g, is fixed
from dissolved N2, a source of total nitrogen (PCLake / CAEDYM floor form,
:func:`kinetics.nitrogen_limitation_with_fixation`).
f_light is Steele's curve averaged over the mixed depth with self-shading (:mod:`light`),
transport the flow network (:mod:`hydraulics`). Methods and sources in
:mod:`kinetics`, :mod:`light` and :mod:`parameters`; the scheme follows the
nutrient–phytoplankton models of Di Toro et al. (1971) and Chapra (1997,
Surface Water-Quality Modeling, ch. 33–34), whose organic N and P pools
are the detrital pools here.

Everything here is vectorised over (members, basins, groups); arrays of one
member's basins are ``(M, B, 4 + G)`` "blocks" (see ``StateLayout.blocks``).
Drivers at the model's times come from :mod:`forcing`; nutrient totals and
the mass budget built on :func:`process_fluxes` are in :mod:`budget`.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from assimilation import hydraulics, kinetics, light
from assimilation.forcing import Forcing, check_members, forcing_at
from assimilation.spec import NUTRIENT_SLOTS as _S
from assimilation.spec import Drivers, ModelSpec, StateLayout

#: Group parameters that may differ between ensemble members (fields of
#: :class:`assimilation.spec.Group`, keys of ``params`` throughout) [1/d].
PARAMETER_KEYS = ("mu_max_20_per_d", "mortality_20_per_d")
#: Basin parameters that may differ between ensemble members (keys of
#: ``params``, one value per basin): internal phosphorus loading at 20 °C
#: [mg P/m²/d] (:meth:`assimilation.spec.ModelSpec.sediment_release_by_basin`).
BASIN_PARAMETER_KEYS = ("sediment_phosphorus_release_20_mg_m2_d",)


@dataclass(frozen=True, eq=False)
class Coefficients:
    """Model coefficients as broadcastable arrays (members, basins, groups).

    mu_max_20 and mortality_20 are (M or 1, 1, G) [1/d]; the other group
    constants (G,); depth_m, volume_m3 (B,). fixation_floor (G,) [-] is the
    fixation_growth_fraction of a nitrogen-fixing group and 0 otherwise;
    any_fixing tells whether some group fixes. sediment_release_20 (M or 1,
    B) [mg P/m²/d]; any_release tells whether some basin releases.
    remineralisation_20 (2,) [1/d] for detrital N and P; detritus_settling
    [m/d].
    """

    mu_max_20: np.ndarray
    mortality_20: np.ndarray
    theta_growth: np.ndarray
    theta_mortality: np.ndarray
    k_n: np.ndarray
    k_p: np.ndarray
    light_saturation: np.ndarray
    settling: np.ndarray
    depth_m: np.ndarray
    volume_m3: np.ndarray
    n_to_chl: float
    p_to_chl: float
    recycled: float
    par_fraction: float
    k_background: float
    k_chlorophyll: float
    sediment_release_20: np.ndarray
    any_release: bool
    theta_sediment: float
    denitrification_20: float
    theta_denitrification: float
    fixation_floor: np.ndarray
    any_fixing: bool
    detrital_fraction: float
    remineralisation_20: np.ndarray
    theta_remineralisation: float
    detritus_settling: float


def coefficients(spec: ModelSpec, params: dict | None = None, n_members: int | None = None) -> Coefficients:
    """Arrays of the spec's constants, with per-member parameters from ``params``.

    params: None or a dict with keys among ``PARAMETER_KEYS``, each (M, G) or
    broadcastable to it [1/d], and ``BASIN_PARAMETER_KEYS``, each (M, B) or
    (B,) [mg P/m²/d]; absent keys use the spec's values.
    """
    groups = spec.groups
    sizes = {key: spec.n_groups for key in PARAMETER_KEYS} | {key: spec.n_basins for key in BASIN_PARAMETER_KEYS}
    base = {
        "mu_max_20_per_d": np.array([g.mu_max_20_per_d for g in groups])[None, None, :],
        "mortality_20_per_d": np.array([g.mortality_20_per_d for g in groups])[None, None, :],
        "sediment_phosphorus_release_20_mg_m2_d": spec.sediment_release_by_basin()[None, :],
    }
    if params:
        unknown = set(params) - set(sizes)
        if unknown:
            raise ValueError(f"unknown model parameter(s) {sorted(unknown)}; expected keys among {tuple(sizes)}")
        for key, value in params.items():
            value = np.asarray(value, dtype=float)
            n = sizes[key]
            if value.ndim == 0 or value.shape[-1] != n or value.ndim > 2:
                raise ValueError(f"params[{key!r}] must have shape (M, {n}) or ({n},), got {value.shape}")
            if n_members is not None and value.ndim == 2 and value.shape[0] not in (1, n_members):
                raise ValueError(f"params[{key!r}] has {value.shape[0]} members, the ensemble has {n_members}")
            if not np.all(np.isfinite(value)) or np.any(value < 0):
                raise ValueError(f"params[{key!r}] must be finite and non-negative")
            base[key] = value.reshape(-1, 1, n) if key in PARAMETER_KEYS else value.reshape(-1, n)
    release = base["sediment_phosphorus_release_20_mg_m2_d"]
    return Coefficients(
        mu_max_20=base["mu_max_20_per_d"],
        mortality_20=base["mortality_20_per_d"],
        theta_growth=np.array([g.theta_growth for g in groups]),
        theta_mortality=np.array([g.theta_mortality for g in groups]),
        k_n=np.array([g.k_n_ugL for g in groups]),
        k_p=np.array([g.k_p_ugL for g in groups]),
        light_saturation=np.array([g.light_saturation_W_m2 for g in groups]),
        settling=np.array([g.settling_m_per_d for g in groups]),
        depth_m=np.array([b.mean_depth_m for b in spec.basins]),
        volume_m3=np.array([b.volume_m3 for b in spec.basins]),
        n_to_chl=spec.nitrogen_to_chlorophyll,
        p_to_chl=spec.phosphorus_to_chlorophyll,
        recycled=spec.recycled_fraction,
        par_fraction=spec.par_fraction,
        k_background=spec.background_attenuation_per_m,
        k_chlorophyll=spec.chlorophyll_attenuation_m2_mg,
        sediment_release_20=release,
        any_release=bool(np.any(release > 0)),
        theta_sediment=spec.theta_sediment_release,
        denitrification_20=spec.denitrification_20_per_d,
        theta_denitrification=spec.theta_denitrification,
        fixation_floor=np.array([g.fixation_growth_fraction if g.nitrogen_fixing else 0.0 for g in groups]),
        any_fixing=any(g.nitrogen_fixing for g in groups),
        detrital_fraction=spec.detrital_fraction,
        remineralisation_20=np.array([spec.nitrogen_remineralisation_20_per_d,
                                      spec.phosphorus_remineralisation_20_per_d]),
        theta_remineralisation=spec.theta_remineralisation,
        detritus_settling=spec.detritus_settling_m_per_d,
    )


def light_factor(C: np.ndarray, co: Coefficients, par: np.ndarray, par_weights=None) -> np.ndarray:
    """Steele's factor averaged over the mixed depth, with self-shading. [-]

    C blocks (M, B, 4 + G) [µg/L]; par (B,) [W/m² PAR at the surface], or
    (Q, B) irradiances at Q times with quadrature weights par_weights (Q,)
    summing to one, giving the time mean of the factor. Returns (M, B, G).
    """
    A = C[..., _S:]
    k = light.attenuation_coefficient(co.k_background, co.k_chlorophyll, A.sum(axis=-1, keepdims=True))
    depth = co.depth_m[:, None]
    if par_weights is None:
        return light.steele_depth_average(par[..., :, None], co.light_saturation, k, depth)
    return light.steele_depth_average_mean(par[:, :, None], par_weights, co.light_saturation, k, depth)


def _rates(C, co, temperature, par, par_weights=None):
    """Growth, mortality, settling [1/d] and the DIN share of growth [-] (or 1.0)."""
    N = C[..., 0:1]
    P = C[..., 1:2]
    T = temperature[..., :, None]
    f_light = light_factor(C, co, par, par_weights)
    if co.any_fixing:
        f_n, share = kinetics.nitrogen_limitation_with_fixation(N, co.k_n, co.fixation_floor)
        f_nutrient = np.minimum(f_n, kinetics.monod(P, co.k_p))
        mu = co.mu_max_20 * kinetics.temperature_factor(co.theta_growth, T) * f_light * f_nutrient
    else:
        mu = kinetics.growth_rate(co.mu_max_20, co.theta_growth, T, f_light, N, P, co.k_n, co.k_p)
        share = 1.0
    m = kinetics.mortality_rate(co.mortality_20, co.theta_mortality, T)
    s = kinetics.settling_rate(co.settling, co.depth_m[:, None])
    return mu, m, s, share


@dataclass(frozen=True, eq=False)
class ProcessFluxes:
    """Volumetric process fluxes in one basin [µg/L/d].

    growth, mortality, settling (M, B, G) in chlorophyll-a units (growth of
    A, mortality + respiration of A, settling of A); sediment_phosphorus
    (B,) or (M, B) [µg P/L/d] or 0.0; denitrification (M, B) [µg N/L/d] or
    0.0; fixed_growth (M, B, G) [µg chl-a/L/d] or 0.0, the part of growth
    whose nitrogen is fixed from N2 rather than taken from DIN (its N is
    n_to_chl·fixed_growth); remineralisation and detritus_settling (M, B, 2)
    [µg/L/d] of detrital (N, P), or 0.0. Nutrient fluxes of the algae follow
    by stoichiometry; the detritus formed is detrital_fraction·(1 −
    recycled) of the mortality's nutrients (:func:`detritus_formation`).
    """

    growth: np.ndarray
    mortality: np.ndarray
    settling: np.ndarray
    sediment_phosphorus: np.ndarray | float
    denitrification: np.ndarray | float = 0.0
    fixed_growth: np.ndarray | float = 0.0
    remineralisation: np.ndarray | float = 0.0
    detritus_settling: np.ndarray | float = 0.0


def process_fluxes(C: np.ndarray, co: Coefficients, temperature: np.ndarray, par: np.ndarray,
                   par_weights=None) -> ProcessFluxes:
    """The fluxes of every local process; arguments as in :func:`reaction_tendency`."""
    A = C[..., _S:]
    mu, m, s, share = _rates(C, co, temperature, par, par_weights)
    growth = mu * A
    fixed = (1.0 - share) * growth if co.any_fixing else 0.0
    release = 0.0
    if co.any_release:
        release = kinetics.sediment_phosphorus_release(
            co.sediment_release_20, co.theta_sediment, temperature, co.depth_m)
    denitrification = 0.0
    if co.denitrification_20 > 0:
        denitrification = kinetics.denitrification_rate(
            co.denitrification_20, co.theta_denitrification, temperature) * C[..., 0]
    detritus = C[..., 2:_S]
    remineralisation = kinetics.remineralisation_rate(
        co.remineralisation_20, co.theta_remineralisation, np.asarray(temperature)[..., None]) * detritus
    detritus_settling = kinetics.settling_rate(co.detritus_settling, co.depth_m)[:, None] * detritus
    return ProcessFluxes(growth, m * A, s * A, release, denitrification, fixed, remineralisation, detritus_settling)


def detritus_formation(f: ProcessFluxes, co: Coefficients) -> np.ndarray:
    """Detrital (N, P) formed from mortality, (M, B, 2) [µg/L/d]: the detrital
    fraction of the non-recycled mortality, by stoichiometry."""
    dead = co.detrital_fraction * (1.0 - co.recycled) * f.mortality.sum(axis=-1)
    return dead[..., None] * np.array([co.n_to_chl, co.p_to_chl])


def tendency_from_fluxes(f: ProcessFluxes, co: Coefficients) -> np.ndarray:
    """Assemble dC/dt [µg/L/d], blocks (M, B, 4 + G), from process fluxes."""
    uptake = f.growth.sum(axis=-1)
    recycled = co.recycled * f.mortality.sum(axis=-1)
    out = np.empty(f.growth.shape[:-1] + (_S + f.growth.shape[-1],))
    out[..., _S:] = f.growth - f.mortality - f.settling
    din_uptake = uptake - f.fixed_growth.sum(axis=-1) if np.ndim(f.fixed_growth) else uptake
    remin = np.broadcast_to(f.remineralisation, out.shape[:-1] + (2,))
    out[..., 0] = co.n_to_chl * (recycled - din_uptake) + remin[..., 0] - f.denitrification
    out[..., 1] = co.p_to_chl * (recycled - uptake) + remin[..., 1] + f.sediment_phosphorus
    out[..., 2:_S] = detritus_formation(f, co) - f.remineralisation - f.detritus_settling
    return out


def reaction_tendency(C: np.ndarray, co: Coefficients, temperature: np.ndarray, par: np.ndarray,
                      par_weights=None) -> np.ndarray:
    """Local (within-basin) tendency dC/dt [µg/L/d], blocks (M, B, 4 + G).

    C blocks (M, B, 4 + G) [µg/L]; temperature (B,) or (M, B) [°C]; par
    (B,) [W/m²] (or (Q, B) with par_weights, see :func:`light_factor`).
    """
    return tendency_from_fluxes(process_fluxes(C, co, temperature, par, par_weights), co)


def transport_tendency(C: np.ndarray, spec: ModelSpec, inflow_m3_s: np.ndarray,
                       inflow_concentration: np.ndarray) -> np.ndarray:
    """Flushing and transport dC/dt = L·C + s [µg/L/d], blocks (M, B, 4 + G).

    inflow_m3_s (I,) [m³/s], inflow_concentration (I, 4 + G) [µg/L].
    """
    L = hydraulics.transport_matrix(spec, inflow_m3_s)
    s = hydraulics.inflow_source(spec, inflow_m3_s, inflow_concentration)
    return L @ C + s


def tendency(E: np.ndarray, spec: ModelSpec, forcing: Forcing, params: dict | None = None) -> np.ndarray:
    """Full model tendency dE/dt [µg/L/d] of an ensemble (M, n_state).

    forcing: a :class:`Forcing` at one time (leading axis of length 1);
    params as in :func:`coefficients`.
    """
    layout = StateLayout(spec)
    E = np.asarray(E, dtype=float)
    check_members(forcing, E.shape[0])
    C = layout.blocks(E)
    co = coefficients(spec, params, E.shape[0])
    out = reaction_tendency(C, co, forcing.water_temperature_C[0], forcing.par_W_m2[0])
    out = out + transport_tendency(C, spec, forcing.inflow_m3_s[0], forcing.inflow_concentration_ugL[0])
    return out.reshape(out.shape[:-2] + (layout.n_state,))


def rhs(t: float, y: np.ndarray, spec: ModelSpec, drivers: Drivers, params: dict | None = None) -> np.ndarray:
    """Right-hand side for :func:`scipy.integrate.solve_ivp` [µg/L/d].

    y: flat state of one or more members (M·n_state,); t [epoch days].
    """
    n_state = StateLayout(spec).n_state
    E = np.asarray(y, dtype=float).reshape(-1, n_state)
    return tendency(E, spec, forcing_at(drivers, spec, [t]), params).ravel()
