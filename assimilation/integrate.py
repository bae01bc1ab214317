"""Fixed-step, positivity-preserving, mass-conserving integrator of the model.

One step of length h is a Strang splitting (Strang 1968, SIAM J. Numer.
Anal. 5:506) of transport and local processes:

    transport(h/2) → processes(h) → transport(h/2)

* Transport through the basin network is linear in the state and is
  advanced exactly with the matrix exponential, coefficients frozen at the
  middle of the step (:func:`assimilation.hydraulics.propagators`).
* Local processes (growth, uptake, mortality, recycling, settling, sediment
  release) use the second-order modified Patankar scheme of Bruggeman,
  Burchard, Kooi & Sommeijer (2007), "A second-order, unconditionally
  positive, mass-conserving integration scheme for biochemical systems",
  Applied Numerical Mathematics 57:36–58. Each stage multiplies the whole
  tendency of a basin by one scalar p ∈ (0, ~1], the root of
  p = Π_j (c_j + p·h·f_j) / c_j* over the species j with a negative
  tendency, so every concentration stays positive and, because all
  processes are scaled alike, every linear invariant (total N, total P) is
  kept to round-off.

Vectorised over members and basins; the only Python loop is over time
steps. Drivers are interpolated once for all steps of a call.
"""
from __future__ import annotations

import math

import numpy as np

from assimilation import hydraulics, model
from assimilation.spec import Drivers, ModelSpec, StateLayout

_NEWTON_MAX_ITER = 50
_NEWTON_TOL = 1e-14
_TINY = 1e-300
#: 3-point Gauss–Legendre nodes and weights on [0, 1] (Abramowitz & Stegun 1964, 25.4.29)
_GAUSS_NODES = 0.5 + 0.5 * np.array([-np.sqrt(0.6), 0.0, np.sqrt(0.6)])
_GAUSS_WEIGHTS = np.array([5.0, 8.0, 5.0]) / 18.0


def _patankar_factor(a: np.ndarray, b: np.ndarray, d: np.ndarray, start: float = 0.0) -> np.ndarray:
    """Root p of p = Π_j (b_j − p·a_j) / d_j per (member, basin). [-]

    a ≥ 0 (zero for species left out), b, d > 0; arrays (M, B, S) → (M, B, 1).
    g(p) = p − Π(...) is increasing and concave on [0, min b/a), so Newton's
    method from a point left of the root (g ≤ 0) climbs monotonically to the
    root and never leaves the interval where all factors are positive. The
    iteration starts at ``start`` where that point is left of the root, else
    at 0.
    """
    shape = a.shape[:-1] + (1,)
    p = np.zeros(shape)
    if start > 0.0:
        rest = b - start * a
        ok = np.all(rest > 0, axis=-1, keepdims=True)
        ok &= start - np.prod(np.where(rest > 0, rest, 1.0) / d, axis=-1, keepdims=True) <= 0
        p = np.where(ok, start, 0.0)
    for _ in range(_NEWTON_MAX_ITER):
        rest = b - p * a
        h = np.prod(rest / d, axis=-1, keepdims=True)
        g = p - h
        dg = 1.0 + h * np.sum(a / rest, axis=-1, keepdims=True)
        step = g / dg
        p = p - step
        if np.max(np.abs(step)) < _NEWTON_TOL:
            break
    return p


def _patankar_update(C, Cstar, f, h, co):
    """One modified Patankar update of the local processes over h [d].

    C the state at the start of the step and Cstar the weighting state,
    blocks (M, B, 2 + G) [µg/L]; f the process fluxes (:class:`ProcessFluxes`).
    Each process is scaled by the ratio new/weighting of the species it
    consumes (Burchard, Deleersnijder & Meister 2003, Appl. Numer. Math.
    47:1; for processes with several reactants the product of the ratios,
    Broekhuizen et al. 2008, Appl. Numer. Math. 58:319):

    * losses of group g (mortality, settling) consume A_g: weight A_g'/A_g*;
    * growth of all groups consumes N and P: one weight q = (N'/N*)·(P'/P*).

    A_g' is linear in q and N', P' decrease linearly in q, so q is the root
    of a concave scalar equation (:func:`_patankar_factor`). Every process is
    scaled as a whole, so total N and P are conserved to round-off, and all
    concentrations stay positive.
    """
    a_n, a_p = co.n_to_chl, co.p_to_chl
    A, N, P = C[..., 2:], C[..., 0:1], C[..., 1:2]
    A_star = np.maximum(Cstar[..., 2:], _TINY)
    loss = f.mortality + f.settling
    denom = 1.0 + h * loss / A_star                          # A_g' = (A_g + h q G_g) / denom
    base_A = A / denom
    slope_A = h * f.growth / denom
    # N' = N + h Σ_g r a_N m_g (A_g'/A_g*) − q h a_N Σ_g G_g  =  alpha − beta q
    recycled_w = h * co.recycled * f.mortality / A_star      # per unit of A_g'
    ret0 = np.sum(recycled_w * base_A, axis=-1, keepdims=True)
    ret1 = np.sum(recycled_w * slope_A, axis=-1, keepdims=True)
    uptake = h * np.sum(f.growth, axis=-1, keepdims=True)
    source_p = h * np.asarray(f.sediment_phosphorus)
    if np.ndim(source_p):
        source_p = source_p[:, None]
    alpha = np.concatenate([N + a_n * ret0, P + a_p * ret0 + source_p], axis=-1)
    beta = np.concatenate([a_n * (uptake - ret1), a_p * (uptake - ret1)], axis=-1)
    beta = np.maximum(beta, 0.0)
    # a nutrient that growth does not consume (no growth, e.g. at night) drops out of q
    used = beta > 0
    q = _patankar_factor(np.where(used, beta, 0.0), np.where(used, alpha, 1.0),
                         np.where(used, np.maximum(Cstar[..., :2], _TINY), 1.0), start=0.99)
    out = np.empty(np.broadcast_shapes(C.shape, f.growth.shape[:-1] + (C.shape[-1],)))
    out[..., 2:] = base_A + q * slope_A
    out[..., :2] = np.maximum(alpha - q * beta, 0.0)
    return out


def _process_step(C, h, co, temp0, temp1, par_nodes):
    """Second-order modified Patankar–Runge–Kutta step of the local processes.

    Stage 1 is an explicit Euler predictor wherever it keeps every
    concentration of a basin above half its value, else the first-order
    Patankar update weighted by the old state; stage 2 is the MPRK22
    corrector (Burchard et al. 2003) with the mean of the two stages' fluxes,
    weighted by the predictor, which alone guarantees positivity and
    conservation (its weights are 1 + O(h²) for any first-order predictor).

    Both stages use the light factor averaged over the step by Gauss–Legendre
    quadrature at par_nodes (Q, B): irradiance changes within an hour far
    more than the state does (sunrise, sunset), and the trapezoidal rule of
    the two stages would misjudge the daily light dose by 2–3 %.
    """
    f0 = model.process_fluxes(C, co, temp0, par_nodes, _GAUSS_WEIGHTS)
    C1 = C + h * model.tendency_from_fluxes(f0, co)
    gentle = np.all(C1 >= 0.5 * C, axis=-1, keepdims=True)
    if not np.all(gentle):
        C1 = np.where(gentle, C1, _patankar_update(C, C, f0, h, co))
    f1 = model.process_fluxes(C1, co, temp1, par_nodes, _GAUSS_WEIGHTS)
    fm = model.ProcessFluxes(0.5 * (f0.growth + f1.growth), 0.5 * (f0.mortality + f1.mortality),
                             0.5 * (f0.settling + f1.settling),
                             0.5 * (np.asarray(f0.sediment_phosphorus) + np.asarray(f1.sediment_phosphorus)))
    return _patankar_update(C, C1, fm, h, co)


def _check_ensemble(E, layout: StateLayout) -> np.ndarray:
    E = np.asarray(E, dtype=float)
    if E.ndim != 2 or E.shape[1] != layout.n_state:
        raise ValueError(f"ensemble must have shape (members, {layout.n_state}), got {E.shape}")
    if not np.all(np.isfinite(E)):
        raise ValueError("ensemble contains NaN or inf")
    if np.any(E < 0):
        raise ValueError("ensemble contains negative concentrations; the model state must be non-negative")
    return E


def _step_grid(t0_d: float, times: np.ndarray, dt_d: float):
    """Time grid with steps ≤ dt between t0 and each save time, and the grid
    index of every save time."""
    grid = [np.array([t0_d])]
    index, n, t_prev = [], 0, t0_d
    for t in times:
        span = t - t_prev
        k = 0 if span <= 0 else max(1, math.ceil(span / dt_d - 1e-9))
        if k:
            grid.append(np.linspace(t_prev, t, k + 1)[1:])
        n += k
        index.append(n)
        t_prev = t
    return np.concatenate(grid), np.array(index)


def _run(E, spec, drivers, t0_d, save_times, dt_d, params):
    layout = StateLayout(spec)
    E = _check_ensemble(E, layout)
    drivers.check_against(spec)
    if not (isinstance(dt_d, (int, float)) and dt_d > 0 and math.isfinite(dt_d)):
        raise ValueError(f"dt_d must be a positive number of days, got {dt_d!r}")
    save_times = np.atleast_1d(np.asarray(save_times, dtype=float))
    if save_times.ndim != 1 or save_times.size == 0:
        raise ValueError("save_times_d must be a non-empty 1-D sequence of epoch days")
    if save_times[0] < t0_d or np.any(np.diff(save_times) < 0):
        raise ValueError("save_times_d must be non-decreasing and not before t0_d")
    model.check_time_range(drivers, t0_d, save_times[-1])
    co = model.coefficients(spec, params, E.shape[0])
    M = E.shape[0]

    grid, save_index = _step_grid(float(t0_d), save_times, float(dt_d))
    n_steps = grid.size - 1
    out = np.empty((save_times.size, M, layout.n_state))
    C = layout.blocks(E).copy()

    s_ptr = 0
    while s_ptr < save_index.size and save_index[s_ptr] == 0:
        out[s_ptr] = C.reshape(M, -1)
        s_ptr += 1
    if n_steps == 0:
        return out

    h_all = np.diff(grid)
    nodes = model.forcing_at(drivers, spec, grid)
    mids = model.forcing_at(drivers, spec, 0.5 * (grid[:-1] + grid[1:]))
    flowing = np.any(mids.inflow_m3_s > 0)
    if flowing:
        L = hydraulics.transport_matrix(spec, mids.inflow_m3_s)                      # (K, B, B)
        src = hydraulics.inflow_source(spec, mids.inflow_m3_s, mids.inflow_concentration_ugL)  # (K, B, S)
        # one propagator per distinct step length (the grid has at most a few)
        Phi = np.empty_like(L)
        Gam = np.empty_like(L)
        for h in np.unique(np.round(h_all, 15)):
            sel = np.isclose(h_all, h, rtol=1e-12, atol=0.0)
            Phi[sel], Gam[sel] = hydraulics.propagators(L[sel], 0.5 * h_all[sel][0])
        gain = Gam @ src                                                              # (K, B, S)

    temp = nodes.water_temperature_C
    par = model.forcing_at(drivers, spec, (grid[:-1, None] + h_all[:, None] * _GAUSS_NODES).ravel()).par_W_m2
    par = par.reshape(n_steps, _GAUSS_NODES.size, spec.n_basins)
    for k in range(n_steps):
        h = h_all[k]
        if flowing:
            C = Phi[k] @ C + gain[k]
        C = _process_step(C, h, co, temp[k], temp[k + 1], par[k])
        if flowing:
            C = Phi[k] @ C + gain[k]
        while s_ptr < save_index.size and save_index[s_ptr] == k + 1:
            out[s_ptr] = C.reshape(M, -1)
            s_ptr += 1
    return out


def advance(E, spec: ModelSpec, drivers: Drivers, t0_d: float, t1_d: float, *,
            dt_d: float = 1.0 / 24.0, params: dict | None = None) -> np.ndarray:
    """Advance an ensemble from t0_d to t1_d [epoch days]; returns (M, n_state) [µg/L].

    E (M, n_state) [µg/L], non-negative, layout of :class:`StateLayout`;
    dt_d [d] the largest step (the span is split into equal steps ≤ dt_d);
    params: per-member parameters, keys among ``model.PARAMETER_KEYS``,
    shape (M, G) [1/d]. Drivers must cover [t0_d, t1_d].
    """
    if t1_d < t0_d:
        raise ValueError(f"t1_d ({t1_d}) must not be before t0_d ({t0_d})")
    return _run(E, spec, drivers, float(t0_d), [float(t1_d)], dt_d, params)[0]


def simulate(E, spec: ModelSpec, drivers: Drivers, t0_d: float, save_times_d, *,
             dt_d: float = 1.0 / 24.0, params: dict | None = None) -> np.ndarray:
    """Integrate from t0_d and return the state at each save time, (S, M, n_state) [µg/L].

    save_times_d (S,) [epoch days], non-decreasing, ≥ t0_d (t0_d itself gives
    the initial state). Between save times the span is split into equal
    steps ≤ dt_d [d]. Other arguments as in :func:`advance`.
    """
    return _run(E, spec, drivers, float(t0_d), save_times_d, dt_d, params)
