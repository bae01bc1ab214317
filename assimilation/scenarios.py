"""What-if scenarios: an operator's actions applied to the forecast drivers, and a paired run.

Actions (combinable; times are offsets from the analysis time t0 [d]):

* :class:`Release` — ``flow_m3_s`` more water passed through basin b for a
  period. Basins keep a constant volume (:mod:`hydraulics`), so water
  released at b's outlet must enter b at the same rate. Bloomline's
  modelling decision: the release is made up by more of the water that
  feeds b — the external inflows whose water passes through b, each in
  proportion to its current flow and with its own concentrations (water let
  down from storage upstream of the inflow, or passed by a diversion) — and
  then follows the network to the outlet like any other water. Basin b's
  dilution rate rises from D = Q/V to D = (Q + q)/V, the dilution rate of
  the chemostat (Monod 1950; Novick & Szilard 1950), and a group whose
  maximum net growth rate stays below D washes out (Herbert, Elsworth &
  Telling 1956, J. Gen. Microbiol. 14:601; Smith & Waltman 1995, *The
  Theory of the Chemostat*, Cambridge). Basins on the way from the inflows
  to b and below b are flushed as well.
* :class:`Transfer` — ``flow_m3_s`` of water brought from elsewhere into
  basin b, with its own nitrogen, phosphorus and (optionally) temperature;
  it too follows the network to the outlet.
* :class:`LoadChange` — an inflow's nitrogen and phosphorus concentrations
  (so its loads at the same flow) changed by a percentage from a time on;
  water released from that inflow's supply changes with it.

The action water flows in inflow columns appended to the network
(:func:`apply_actions`). The run without the action has the same columns at
zero flow, so both runs share one spec and one code path, and an action of
zero flow or zero change gives, bit for bit, the run without it.

Water temperature is a driver of the model, not a state. An action that
changes flows changes it by an anomaly θ (T, [M,] B) [°C] carried by the
flows: with L0 and L1 the transport operators without and with the action
(:func:`hydraulics.transport_matrix`) and T the unchanged temperature,
dθ/dt = L1·θ + (L1 − L0)·T + s − θ/τ, where s brings each action water in
at its own temperature (or, when none is given, at the temperature of the
basin it enters) and τ is each basin's surface relaxation time toward the
equilibrium temperature (the linearised surface heat exchange of Edinger,
Duttweiler & Geyer 1968, Water Resour. Res. 4:1137). Implicit Euler on the
driver times.

:func:`paired_run` runs the same members, with the same per-member
parameters and driver scenarios, once without and once with the action.
The forecast integrator draws no random numbers (the filter's model error
is added in the analysis cycle, not in the forecast), so the two runs
differ by the action alone and their member-by-member difference is its
effect (:func:`paired_difference`). :func:`action_budget` gives the water
and the nutrient loads the action adds, from the forcing the model sees.
"""
from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from assimilation import hydraulics, integrate
from assimilation.forcing import forcing_at
from assimilation.forecast import DailyForecast
from assimilation.spec import Drivers, ModelSpec, Network

KG_PER_UG_L_M3 = 1e-6   # µg/L · m³ = mg → kg
#: Quantiles of the paired difference reported with its median.
DIFFERENCE_QUANTILES = (0.05, 0.5, 0.95)
_EPS_D = 1e-9


def _finite(name: str, value: float, *, minimum: float | None = None, strictly: bool = False) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a number, got {value!r}") from None
    if not math.isfinite(x):
        raise ValueError(f"{name} must be finite, got {value!r}")
    if minimum is not None and (x <= minimum if strictly else x < minimum):
        raise ValueError(f"{name} must be {'>' if strictly else '≥'} {minimum:g}, got {x:g}")
    return x


def _index(name: str, value) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 0:
        raise ValueError(f"{name} must be a non-negative integer index, got {value!r}")
    return int(value)


@dataclass(frozen=True)
class Release:
    """Extra water through basin ``basin`` (index): ``flow_m3_s`` [m³/s] from
    ``start_d`` [d after t0] for ``duration_d`` [d], made up by the inflows that feed it."""

    basin: int
    flow_m3_s: float
    start_d: float
    duration_d: float

    def __post_init__(self):
        object.__setattr__(self, "basin", _index("Release.basin", self.basin))
        object.__setattr__(self, "flow_m3_s", _finite("Release.flow_m3_s", self.flow_m3_s, minimum=0.0))
        object.__setattr__(self, "start_d", _finite("Release.start_d", self.start_d, minimum=0.0))
        object.__setattr__(self, "duration_d", _finite("Release.duration_d", self.duration_d, minimum=0.0,
                                                       strictly=True))


@dataclass(frozen=True)
class Transfer:
    """Water from elsewhere into basin ``basin`` (index): ``flow_m3_s`` [m³/s] from ``start_d``
    [d after t0] for ``duration_d`` [d], with DIN ``nitrogen_ugL`` [µg N/L], SRP
    ``phosphorus_ugL`` [µg P/L] and ``temperature_C`` [°C] (None: that of the basin it enters)."""

    basin: int
    flow_m3_s: float
    start_d: float
    duration_d: float
    nitrogen_ugL: float
    phosphorus_ugL: float
    temperature_C: float | None = None

    def __post_init__(self):
        object.__setattr__(self, "basin", _index("Transfer.basin", self.basin))
        object.__setattr__(self, "flow_m3_s", _finite("Transfer.flow_m3_s", self.flow_m3_s, minimum=0.0))
        object.__setattr__(self, "start_d", _finite("Transfer.start_d", self.start_d, minimum=0.0))
        object.__setattr__(self, "duration_d", _finite("Transfer.duration_d", self.duration_d, minimum=0.0,
                                                       strictly=True))
        object.__setattr__(self, "nitrogen_ugL", _finite("Transfer.nitrogen_ugL", self.nitrogen_ugL, minimum=0.0))
        object.__setattr__(self, "phosphorus_ugL", _finite("Transfer.phosphorus_ugL", self.phosphorus_ugL,
                                                           minimum=0.0))
        if self.temperature_C is not None:
            object.__setattr__(self, "temperature_C", _finite("Transfer.temperature_C", self.temperature_C))


@dataclass(frozen=True)
class LoadChange:
    """Inflow ``inflow`` (index): DIN and SRP concentrations changed by ``nitrogen_percent`` and
    ``phosphorus_percent`` [%, ≥ −100] from ``start_d`` [d after t0] to the horizon."""

    inflow: int
    start_d: float
    nitrogen_percent: float = 0.0
    phosphorus_percent: float = 0.0

    def __post_init__(self):
        object.__setattr__(self, "inflow", _index("LoadChange.inflow", self.inflow))
        object.__setattr__(self, "start_d", _finite("LoadChange.start_d", self.start_d, minimum=0.0))
        for key in ("nitrogen_percent", "phosphorus_percent"):
            object.__setattr__(self, key, _finite(f"LoadChange.{key}", getattr(self, key), minimum=-100.0))


Action = Release | Transfer | LoadChange


@dataclass(frozen=True, eq=False)
class ScenarioDrivers:
    """The drivers of a paired run: ``spec`` is the network with the action-water inflows
    appended (columns ``action_inflows``; ``column_action`` gives the index of the action each
    belongs to); ``without`` has them at zero flow, ``with_action`` carries the actions."""

    spec: ModelSpec
    without: Drivers
    with_action: Drivers
    action_inflows: tuple[int, ...]
    column_action: tuple[int, ...]


def inflows_through(network: Network, basin: int) -> list[int]:
    """External inflows whose water passes through ``basin``: those entering it or a basin upstream."""
    out = []
    for i, b in enumerate(network.inflow_basin):
        node = b
        while node != -1 and node != basin:
            node = network.downstream[node]
        if node == basin:
            out.append(i)
    return out


def period_weights(rel_d: np.ndarray, start_d: float, end_d: float) -> np.ndarray:
    """Weights (T,) in [0, 1] at the driver times ``rel_d`` [d after t0] of an action that runs
    over [start_d, end_d) [d]: the lumped projection of the period's indicator onto the hat
    functions of the times, w_k = ∫ 1[start, end)·φ_k dt / ∫ φ_k dt.

    Drivers are interpolated linearly between their times, so a flow q·w_k delivers exactly
    q·(the length of the period within the times): the hat functions sum to one.
    """
    t = np.asarray(rel_d, dtype=float)
    if t.size == 1:
        return np.array([1.0 if start_d - _EPS_D <= t[0] < end_d - _EPS_D else 0.0])
    left, right = t[:-1], t[1:]
    h = right - left
    a = np.clip(start_d, left, right)
    b = np.clip(end_d, left, right)
    inside = b > a
    # ∫_a^b (right − t)/h dt and ∫_a^b (t − left)/h dt over each interval
    to_left = np.where(inside, ((right - a) ** 2 - (right - b) ** 2) / (2 * h), 0.0)
    to_right = np.where(inside, ((b - left) ** 2 - (a - left) ** 2) / (2 * h), 0.0)
    overlap = np.zeros(t.size)
    overlap[:-1] += to_left
    overlap[1:] += to_right
    support = np.zeros(t.size)
    support[:-1] += h / 2
    support[1:] += h / 2
    return np.clip(overlap / support, 0.0, 1.0)


def apply_actions(spec: ModelSpec, drivers: Drivers, actions, t0_d: float, *,
                  surface_relaxation_d) -> ScenarioDrivers:
    """The drivers without and with ``actions`` (see the module doc).

    drivers cover the forecast from ``t0_d`` [epoch days]; water temperature
    (T, B) or (T, M, B) [°C]. An action's flow or change is applied at the driver
    times with the weights of :func:`period_weights`, so that, interpolated
    linearly like every driver, it delivers exactly the volume of its period. surface_relaxation_d (B,) [d]: each basin's
    surface relaxation time (``inf`` for none). ValueError for an index out
    of range, an action whose period holds no driver time, or a release
    through a basin that no flowing inflow feeds.
    """
    drivers.check_against(spec)
    relax = np.broadcast_to(np.asarray(surface_relaxation_d, dtype=float), (spec.n_basins,))
    if np.any(~(relax > 0)):
        raise ValueError("surface_relaxation_d must be positive (inf for no surface exchange)")
    rel = drivers.time_d - float(t0_d)
    T, I, G = drivers.time_d.size, spec.n_inflows, spec.n_groups
    q0 = drivers.inflow_m3_s
    n_base, p_base = drivers.inflow_nitrogen_ugL, drivers.inflow_phosphorus_ugL
    chl = drivers.inflow_chlorophyll_ugL
    n_act, p_act = n_base.copy(), p_base.copy()
    for a in actions:
        if isinstance(a, LoadChange):
            if a.inflow >= I:
                raise ValueError(f"LoadChange.inflow must be an inflow index in 0..{I - 1}, got {a.inflow}")
            on = period_weights(rel, a.start_d, math.inf)
            n_act[:, a.inflow] *= 1.0 + on * (a.nitrogen_percent / 100.0)
            p_act[:, a.inflow] *= 1.0 + on * (a.phosphorus_percent / 100.0)
        elif not isinstance(a, (Release, Transfer)):
            raise ValueError(f"unknown action {a!r}; expected Release, Transfer or LoadChange")
    # appended columns: (basin, flow (T,), N (T,), P (T,), chlorophyll (T, G) or None, temperature, action)
    columns = []
    for k, a in enumerate(actions):
        if isinstance(a, LoadChange):
            continue
        if a.basin >= spec.n_basins:
            raise ValueError(f"{type(a).__name__}.basin must be a basin index in 0..{spec.n_basins - 1}, "
                             f"got {a.basin}")
        on = period_weights(rel, a.start_d, a.start_d + a.duration_d)
        if not on.any():
            raise ValueError(f"{type(a).__name__} from day offset {a.start_d:g} for {a.duration_d:g} d holds "
                             f"none of the driver times (they run to offset {rel[-1]:g} d)")
        name = spec.basins[a.basin].name
        if isinstance(a, Transfer):
            columns.append((a.basin, a.flow_m3_s * on, np.full(T, a.nitrogen_ugL),
                            np.full(T, a.phosphorus_ugL), None if chl is None else np.zeros((T, G)),
                            a.temperature_C, k))
            continue
        feeders = inflows_through(spec.network, a.basin)
        if not feeders:
            raise ValueError(f"no inflow feeds basin {name!r}, so no water can be released through it; "
                             f"bring water from elsewhere (a transfer) instead")
        supply = q0[:, feeders].sum(axis=1)
        if np.any(supply[on > 0] <= 0):
            raise ValueError(f"the inflows feeding basin {name!r} carry no water during the release, so "
                             f"none can be released through it; bring water from elsewhere (a transfer) instead")
        share = q0[:, feeders] / np.where(supply > 0, supply, 1.0)[:, None]
        for j, i in enumerate(feeders):
            columns.append((spec.network.inflow_basin[i], a.flow_m3_s * on * share[:, j],
                            n_act[:, i], p_act[:, i], None if chl is None else chl[:, i], None, k))
    network = Network(spec.network.downstream, spec.network.inflow_basin + tuple(c[0] for c in columns))
    spec_ext = dataclasses.replace(spec, network=network)
    C = len(columns)

    def stack(base, extra):
        return np.concatenate([base, np.stack(extra, axis=1) if C else np.zeros((T, 0))], axis=1)

    q_with = stack(q0, [c[1] for c in columns])
    q_without = stack(q0, [np.zeros(T) for _ in columns])
    n_extra, p_extra = [c[2] for c in columns], [c[3] for c in columns]
    chl_ext = None
    if chl is not None:
        chl_ext = np.concatenate([chl, np.stack([c[4] for c in columns], axis=1) if C else np.zeros((T, 0, G))],
                                 axis=1)
    without = Drivers(drivers.time_d, drivers.water_temperature_C, drivers.shortwave_W_m2, q_without,
                      stack(n_base, n_extra), stack(p_base, p_extra), chl_ext)
    temperature = drivers.water_temperature_C
    if C:
        theta = _temperature_anomaly(spec_ext, drivers.time_d, temperature, q_without, q_with,
                                     [(c[0], c[5]) for c in columns], I, relax)
        temperature = temperature + theta
    with_action = Drivers(drivers.time_d, temperature, drivers.shortwave_W_m2, q_with,
                          stack(n_act, n_extra), stack(p_act, p_extra), chl_ext)
    return ScenarioDrivers(spec_ext, without, with_action, tuple(range(I, I + C)), tuple(c[6] for c in columns))


def _temperature_anomaly(spec, time_d, temperature, q_without, q_with, entries, first_column, relax_d):
    """θ (T, [M,] B) [°C] of dθ/dt = L1·θ + (L1 − L0)·T + s − θ/τ (module doc), implicit Euler.

    entries: per appended column (basin it enters, temperature [°C] or None)."""
    volume = np.array([b.volume_m3 for b in spec.basins])
    L0 = hydraulics.transport_matrix(spec, q_without)                     # (T, B, B) [1/d]
    L1 = hydraulics.transport_matrix(spec, q_with)
    temp = np.asarray(temperature, dtype=float)
    per_member = temp.ndim == 3
    Tb = np.moveaxis(temp, -1, 1) if per_member else temp[:, :, None]     # (T, B, M or 1)
    forcing = np.einsum("tjk,tkm->tjm", L1 - L0, Tb)                       # (L1 − L0)·T
    for c, (basin, temp_in) in enumerate(entries):
        rate = q_with[:, first_column + c] * hydraulics.SECONDS_PER_DAY / volume[basin]   # [1/d]
        inflow_temp = Tb[:, basin, :] if temp_in is None else temp_in
        forcing[:, basin, :] += rate[:, None] * inflow_temp
    B = spec.n_basins
    decay = np.diag(1.0 / relax_d)
    theta = np.zeros_like(Tb)
    for k in range(1, time_d.size):
        h = time_d[k] - time_d[k - 1]
        A = np.eye(B) - h * (L1[k] - decay)
        theta[k] = np.linalg.solve(A, theta[k - 1] + h * forcing[k])
    return np.moveaxis(theta, 1, -1) if per_member else theta[:, :, 0]


def action_budget(scenario: ScenarioDrivers, times_d) -> dict[str, np.ndarray]:
    """What the action adds over each interval of ``times_d`` (S,) [epoch days], from the forcing the
    integrator sees at those times (trapezoid rule, exact for its linear-in-time drivers when
    ``times_d`` are its step times): ``water_m3`` (S−1,) [m³] of action water, ``nitrogen_kg`` and
    ``phosphorus_kg`` (S−1,) [kg] the change of the external total-N and total-P loads (dissolved
    plus algal), with minus without."""
    spec = scenario.spec
    times = np.asarray(times_d, dtype=float)
    stoich = np.array([spec.nitrogen_to_chlorophyll, spec.phosphorus_to_chlorophyll])
    spd = hydraulics.SECONDS_PER_DAY

    def rates(drivers):
        f = forcing_at(drivers, spec, times)
        c = f.inflow_concentration_ugL
        total = c[..., :2] + stoich * c[..., 2:].sum(axis=-1, keepdims=True)      # (S, I, 2) [µg/L]
        load = (f.inflow_m3_s[..., None] * total).sum(axis=1) * spd * KG_PER_UG_L_M3  # (S, 2) [kg/d]
        return f.inflow_m3_s.sum(axis=1) * spd, load                                # [m³/d], [kg/d]

    w0, l0 = rates(scenario.without)
    w1, l1 = rates(scenario.with_action)
    h = np.diff(times)

    def trapezoid(x):
        return 0.5 * h * (x[1:] + x[:-1]) if x.ndim == 1 else 0.5 * h[:, None] * (x[1:] + x[:-1])

    load = trapezoid(l1 - l0)
    return {"water_m3": trapezoid(w1 - w0), "nitrogen_kg": load[:, 0], "phosphorus_kg": load[:, 1]}


@dataclass(frozen=True, eq=False)
class PairedRun:
    """States (S, M, n_state) [µg/L] at ``times_d`` (S,) [epoch days] without and with the action."""

    times_d: np.ndarray
    without: np.ndarray
    with_action: np.ndarray
    scenario: ScenarioDrivers


def paired_run(states: np.ndarray, scenario: ScenarioDrivers, t0_d: float, save_times_d, *,
               params: dict | None = None, dt_d: float = 1.0 / 24.0, model_error_log_sd_per_d: float = 0.0,
               floor_ugL: float = 1e-3, seed=None) -> PairedRun:
    """The same members ``states`` (M, n_state) [µg/L] with the same ``params`` run from ``t0_d``
    without and with the action (:func:`integrate.simulate`; arguments as there).

    With ``model_error_log_sd_per_d`` > 0 both runs carry the forecast's model error
    (:func:`assimilation.forecast.simulate_with_model_error`) with the same draws (one ``seed``),
    so the difference is the action's effect and not noise; ``save_times_d`` must then be the
    hourly forecast times from ``t0_d``.
    """
    save = np.asarray(save_times_d, dtype=float)
    if model_error_log_sd_per_d > 0:
        from assimilation.forecast import simulate_with_model_error

        horizon = int(round(save[-1] - t0_d))
        runs = [simulate_with_model_error(states, scenario.spec, d, t0_d, horizon, params=params,
                                          log_sd_per_d=model_error_log_sd_per_d, floor_ugL=floor_ugL, seed=seed)
                for d in (scenario.without, scenario.with_action)]
        return PairedRun(save, runs[0], runs[1], scenario)
    without = integrate.simulate(states, scenario.spec, scenario.without, t0_d, save, dt_d=dt_d, params=params)
    with_action = integrate.simulate(states, scenario.spec, scenario.with_action, t0_d, save, dt_d=dt_d,
                                     params=params)
    return PairedRun(save, without, with_action, scenario)


@dataclass(frozen=True, eq=False)
class PairedDifference:
    """Member-by-member difference (with − without) of daily means: ``quantiles`` (3, K+1, B) at
    :data:`DIFFERENCE_QUANTILES` and ``mean`` (K+1, B) in the quantity's unit; ``exceedance``
    (K+1, B, L) the change of each level's probability [-]."""

    quantiles: np.ndarray
    mean: np.ndarray
    exceedance: np.ndarray


def paired_difference(without: DailyForecast, with_action: DailyForecast) -> PairedDifference:
    """The action's effect from the daily statistics of a paired run's two halves."""
    if without.members.shape != with_action.members.shape:
        raise ValueError(f"paired forecasts must have the same members and days, got {without.members.shape} "
                         f"and {with_action.members.shape}")
    d = with_action.members - without.members                                 # (K+1, M, B)
    return PairedDifference(np.quantile(d, DIFFERENCE_QUANTILES, axis=1), d.mean(axis=1),
                            with_action.exceedance - without.exceedance)
