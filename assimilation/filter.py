"""The Bloomline filter cycle over the nutrient–phytoplankton model.

One cycle (:func:`assimilate`) takes the last checkpoint, the new QC-passed
readings, the drivers and the spec, and returns the next checkpoint with
diagnostics. Readings are aggregated into windows
(:func:`assimilation.observe.aggregate_windows`); the ensemble is advanced
by the model (:func:`assimilation.integrate.advance`) to the end of each
window in turn and analysed there.

Augmented ensemble (columns of ``Checkpoint.ensemble``, physical units)::

    [model state (n_state, µg/L, basin-major, DEVELOPERS.md),
     mu_max_20_per_d:<group> (G, 1/d),   mortality_20_per_d:<group> (G, 1/d),
     sensor_gain:<k> (n_sensors, -)]

Parameter columns are present when ``FilterConfig.estimate_parameters`` is
true; sensor gains whenever ``n_sensors`` > 0. The analysis works in log
space for every column (concentrations and positive parameters), so all
stay positive. State augmentation for parameters follows Anderson (2001,
Mon. Wea. Rev. 129:2884) and Evensen (2009, Data Assimilation: the Ensemble
Kalman Filter, 2nd ed., Springer, ch. 10); the spread of the parameters is
kept above a floor to avoid collapse (Aksoy et al. 2006, Mon. Wea. Rev.
134:2951). Inflation: multiplicative on the model state (Anderson and
Anderson 1999) and relaxation to prior spread on all columns (Whitaker and
Hamill 2012). Localization: a Gaspari–Cohn taper of the hop distance
between basins along the flow network; parameters are global and not
localized; a sensor gain is localized like the state of the basin the
sensor is in.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from assimilation import enkf, inflation, localization, observe, transform
from assimilation.checkpoint import Checkpoint
from assimilation.observe import Observations
from assimilation.spec import Drivers, ModelSpec, StateLayout

__all__ = ["FilterConfig", "Checkpoint", "CycleResult", "initial_checkpoint", "assimilate", "split",
           "augmented_names", "PARAMETER_KEYS"]

#: Group parameters estimated by state augmentation (keys of integrate's ``params``).
PARAMETER_KEYS = ("mu_max_20_per_d", "mortality_20_per_d")
GAIN_PREFIX = "sensor_gain"

#: First guess of a basin when the caller gives none [µg/L]: DIN, SRP and
#: chlorophyll-a of each group of a mesotrophic lake early in the season
#: (common practice; the filter corrects it within days of data).
DEFAULT_NITROGEN_UGL = 200.0
DEFAULT_PHOSPHORUS_UGL = 15.0
DEFAULT_CHLOROPHYLL_UGL = 2.0


@dataclass(frozen=True)
class FilterConfig:
    """Settings of the filter; the defaults work for a new water body without tuning.

    members: ensemble size. method: ``"sqrt"`` (local ETKF) or
    ``"stochastic"`` (perturbed observations). inflation [-]: multiplicative
    factor on the spread of the model state before each analysis.
    relaxation_to_prior_spread [-]: RTPS alpha in [0, 1] for the model state.
    localization_hops [hops]: Gaspari–Cohn half-width along the flow
    network (zero at twice this); inf or 0 switches localization off.
    estimate_parameters: augment with mu_max and mortality of each group.
    n_sensors: number of chlorophyll/phycocyanin sensors with an estimated gain.
    parameter_sd_floor [log units, i.e. relative sd]: least spread kept in
    each augmented parameter and gain. parameter_relaxation [-]: RTPS alpha
    for the parameters and gains, which slows their learning but keeps them
    from collapsing onto a wrong value early. parameter_bounds_factor [-]:
    each member's parameters stay within the spec's value times or divided
    by this factor, its gains within [1/factor, factor] (a guard against
    drift in a long season). window_d [d]: aggregation window of
    high-frequency readings. representativeness_fraction [-]: see
    :func:`observe.aggregate_windows`. dt_d [d]: model step.
    initial_state_log_sd, parameter_log_sd, gain_log_sd [log units]: spread
    of the initial ensemble about the first guess, the spec's parameters and
    a gain of 1. state_floor_ugL [µg/L]: concentrations are floored here
    before taking logs. model_error_log_sd_per_d [log units per sqrt(day)]:
    random-walk perturbation of the model state during the forecast
    (stochastic model error; 0 switches it off). The default 0.1 (10 % per
    day) stands for the structural error of a box model against a real
    water body, without which the ensemble grows overconfident and stops
    following the readings (common practice; e.g. Evensen 2009, ch. 4).
    """

    members: int = 60
    method: str = "sqrt"
    inflation: float = 1.02
    relaxation_to_prior_spread: float = 0.5
    localization_hops: float = 1.5
    estimate_parameters: bool = True
    n_sensors: int = 0
    parameter_sd_floor: float = 0.03
    parameter_relaxation: float = 0.5
    parameter_bounds_factor: float = 4.0
    window_d: float = 1.0
    representativeness_fraction: float = observe.REPRESENTATIVENESS_FRACTION
    dt_d: float = 1.0 / 24.0
    initial_state_log_sd: float = 0.5
    parameter_log_sd: float = 0.2
    gain_log_sd: float = 0.2
    state_floor_ugL: float = 1e-3
    model_error_log_sd_per_d: float = 0.1

    def __post_init__(self):
        if int(self.members) != self.members or self.members < 2:
            raise ValueError(f"FilterConfig.members must be an integer >= 2, got {self.members!r}")
        if self.method not in enkf.METHODS:
            raise ValueError(f"FilterConfig.method must be one of {enkf.METHODS}, got {self.method!r}")
        if not self.inflation >= 1.0:
            raise ValueError(f"FilterConfig.inflation must be >= 1, got {self.inflation!r}")
        if not 0.0 <= self.relaxation_to_prior_spread <= 1.0:
            raise ValueError("FilterConfig.relaxation_to_prior_spread must be in [0, 1], "
                             f"got {self.relaxation_to_prior_spread!r}")
        if not self.localization_hops >= 0:
            raise ValueError(f"FilterConfig.localization_hops must be >= 0, got {self.localization_hops!r}")
        if int(self.n_sensors) != self.n_sensors or self.n_sensors < 0:
            raise ValueError(f"FilterConfig.n_sensors must be an integer >= 0, got {self.n_sensors!r}")
        if not 0.0 <= self.parameter_relaxation <= 1.0:
            raise ValueError(f"FilterConfig.parameter_relaxation must be in [0, 1], got {self.parameter_relaxation!r}")
        for key in ("parameter_sd_floor", "initial_state_log_sd", "parameter_log_sd", "gain_log_sd",
                    "model_error_log_sd_per_d", "representativeness_fraction"):
            if not getattr(self, key) >= 0:
                raise ValueError(f"FilterConfig.{key} must be >= 0, got {getattr(self, key)!r}")
        if not self.parameter_bounds_factor > 1.0:
            raise ValueError(f"FilterConfig.parameter_bounds_factor must be > 1, got {self.parameter_bounds_factor!r}")
        for key in ("window_d", "dt_d", "state_floor_ugL"):
            if not getattr(self, key) > 0:
                raise ValueError(f"FilterConfig.{key} must be > 0, got {getattr(self, key)!r}")


@dataclass
class CycleResult:
    """Outcome of one cycle.

    status: ``"ok"`` (observations analysed), ``"no_data"`` (advanced without
    observations), ``"degraded"`` (some analyses skipped for numerical
    trouble; the forecast was kept), ``"failed"`` (the model could not be
    advanced; ``checkpoint`` is the input checkpoint unchanged).
    diagnostics: plain JSON-ready values, see :func:`assimilate`.
    """

    status: str
    message: str
    checkpoint: Checkpoint
    diagnostics: dict = field(default_factory=dict)


def augmented_names(spec: ModelSpec, cfg: FilterConfig) -> tuple[str, ...]:
    """Column names of the augmented ensemble for ``spec`` and ``cfg``."""
    names = list(StateLayout(spec).names())
    if cfg.estimate_parameters:
        for key in PARAMETER_KEYS:
            names += [f"{key}:{g.name}" for g in spec.groups]
    names += [f"{GAIN_PREFIX}:{k}" for k in range(cfg.n_sensors)]
    return tuple(names)


def _spec_parameters(spec: ModelSpec) -> np.ndarray:
    """Spec values of the augmented group parameters, (len(PARAMETER_KEYS) * G,)."""
    return np.array([getattr(g, key) for key in PARAMETER_KEYS for g in spec.groups], dtype=float)


def initial_checkpoint(spec: ModelSpec, cfg: FilterConfig, time_d: float, rng: np.random.Generator, *,
                       initial_state: np.ndarray | None = None) -> Checkpoint:
    """The first checkpoint: members spread about a first guess.

    initial_state (n_state,) [µg/L] first guess (default: the module's
    DEFAULT_* concentrations in every basin). Each member is the first guess
    times a log-normal factor (sd ``cfg.initial_state_log_sd``); parameters
    are the spec's values times log-normal factors (``parameter_log_sd``);
    gains are log-normal about 1 (``gain_log_sd``). The generator for later
    cycles is seeded from ``rng``.
    """
    layout = StateLayout(spec)
    if initial_state is None:
        G = spec.n_groups
        block = np.array([DEFAULT_NITROGEN_UGL, DEFAULT_PHOSPHORUS_UGL] + [DEFAULT_CHLOROPHYLL_UGL] * G)
        initial_state = np.tile(block, spec.n_basins)
    x0 = np.asarray(initial_state, dtype=float).ravel()
    if x0.shape != (layout.n_state,) or not np.all(np.isfinite(x0)) or np.any(x0 < 0):
        raise ValueError(f"initial_state must be ({layout.n_state},) non-negative µg/L, got shape {x0.shape}")
    M = int(cfg.members)
    z0 = transform.to_log(x0, cfg.state_floor_ugL)
    columns = [z0 + cfg.initial_state_log_sd * rng.standard_normal((M, layout.n_state))]
    if cfg.estimate_parameters:
        theta = _spec_parameters(spec)
        if np.any(~(theta > 0)):
            raise ValueError("estimated group parameters (mu_max, mortality) must be > 0 in the spec")
        columns.append(np.log(theta) + cfg.parameter_log_sd * rng.standard_normal((M, theta.size)))
    if cfg.n_sensors:
        columns.append(cfg.gain_log_sd * rng.standard_normal((M, cfg.n_sensors)))
    ensemble = transform.from_log(np.concatenate(columns, axis=1))
    child = np.random.default_rng(int(rng.integers(0, 2**63 - 1)))
    return Checkpoint(time_d=float(time_d), ensemble=ensemble, names=augmented_names(spec, cfg),
                      rng_state=child.bit_generator.state)


def _slices(spec: ModelSpec, names: tuple[str, ...]):
    layout = StateLayout(spec)
    n_state = layout.n_state
    G = spec.n_groups
    n_param = sum(1 for n in names if n.split(":")[0] in PARAMETER_KEYS)
    n_gain = sum(1 for n in names if n.startswith(GAIN_PREFIX + ":"))
    if n_state + n_param + n_gain != len(names) or n_param not in (0, len(PARAMETER_KEYS) * G):
        raise ValueError(f"checkpoint columns {len(names)} do not fit the spec "
                         f"({n_state} state, {n_param} parameters, {n_gain} gains)")
    if tuple(names[:n_state]) != tuple(layout.names()):
        raise ValueError("checkpoint state columns do not match the spec's state layout")
    return layout, slice(0, n_state), slice(n_state, n_state + n_param), slice(n_state + n_param, len(names))


def split(checkpoint: Checkpoint, spec: ModelSpec) -> tuple[np.ndarray, dict[str, np.ndarray], np.ndarray]:
    """Model states (M, n_state) [µg/L], params dict for ``integrate.advance``
    (keys PARAMETER_KEYS, arrays (M, G) [1/d]; empty when parameters are not
    estimated) and sensor gains (M, n_sensors) [-]."""
    _, s_state, s_param, s_gain = _slices(spec, checkpoint.names)
    E = checkpoint.ensemble
    G = spec.n_groups
    params = {}
    theta = E[:, s_param]
    if theta.shape[1]:
        for i, key in enumerate(PARAMETER_KEYS):
            params[key] = theta[:, i * G:(i + 1) * G].copy()
    return E[:, s_state].copy(), params, E[:, s_gain].copy()


def _taper(cfg, spec, layout, obs: Observations, n_param: int, n_gain: int):
    """Localization weights (n_aug, p) and (p, p), or (None, None)."""
    c = cfg.localization_hops
    if c == 0 or math.isinf(c):
        return None, None
    hops = localization.network_hops(spec.network.downstream)
    rho_basin = localization.gaspari_cohn(hops, c)                 # (B, B)
    state_basin = np.repeat(np.arange(spec.n_basins), layout.n_per_basin)
    rows = [rho_basin[state_basin][:, obs.basin], np.ones((n_param, len(obs)))]
    gain_rows = np.zeros((n_gain, len(obs)))
    for k in range(n_gain):  # loop over sensors (a few), not members
        own = np.nonzero(obs.sensor == k)[0]
        if own.size:
            gain_rows[k] = rho_basin[obs.basin[own[0]], obs.basin]
    rows.append(gain_rows)
    return np.concatenate(rows, axis=0), rho_basin[obs.basin][:, obs.basin]


def _json_float(x) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


def _innovation_stats(d, var_he, R):
    """Summary of innovations d = y − mean(HE) against their expected variance."""
    if d.size == 0:
        return {"n": 0}
    expected = var_he + R
    rms = np.sqrt(np.mean(d**2))
    return {
        "n": int(d.size),
        "innovation_mean": _json_float(d.mean()),
        "innovation_sd": _json_float(d.std()),
        "normalised_innovation_mean": _json_float(np.mean(d / np.sqrt(expected))),
        "normalised_innovation_rms": _json_float(np.sqrt(np.mean(d**2 / expected))),
        "prior_spread": _json_float(np.sqrt(np.mean(var_he))),
        "observation_error": _json_float(np.sqrt(np.mean(R))),
        "innovation_rms": _json_float(rms),
        "spread_error_ratio": _json_float(np.sqrt(np.mean(expected)) / rms) if rms > 0 else None,
    }


def assimilate(checkpoint: Checkpoint, observations: Observations, spec: ModelSpec, drivers: Drivers,
               cfg: FilterConfig, t_end_d: float) -> CycleResult:
    """Advance the ensemble from ``checkpoint.time_d`` to ``t_end_d`` [epoch days],
    analysing the readings with checkpoint.time_d < time_d <= t_end_d.

    Readings are aggregated into windows of ``cfg.window_d``; the windows are
    analysed in time order, each at the mean time of its aggregated readings
    (all kinds and basins of one window together).
    Diagnostics: ``n_readings``, ``n_obs`` (windows analysed),
    ``analysis_times_d``, innovation statistics over all analysed windows
    (``innovation_mean``, ``innovation_sd``, normalised forms,
    ``prior_spread``, ``observation_error``, ``innovation_rms``,
    ``spread_error_ratio`` = sqrt(mean(spread² + R)) / rms(innovation), near
    1 for a calibrated filter), the same per kind under ``by_kind``, and
    ``parameter_mean`` / ``parameter_sd`` (physical units) after the cycle.
    """
    from assimilation import integrate  # the model; imported here so the filter's generic parts stand alone

    if not isinstance(checkpoint, Checkpoint):
        raise TypeError(f"checkpoint must be a Checkpoint, got {type(checkpoint).__name__}")
    if not isinstance(observations, Observations):
        raise TypeError(f"observations must be Observations, got {type(observations).__name__}")
    t0 = checkpoint.time_d
    t_end = float(t_end_d)
    if not t_end >= t0:
        raise ValueError(f"t_end_d ({t_end}) must not be before the checkpoint time ({t0})")
    layout, s_state, s_param, s_gain = _slices(spec, checkpoint.names)
    n_gain = s_gain.stop - s_gain.start
    n_param = s_param.stop - s_param.start
    if np.any(observations.sensor >= n_gain):
        raise ValueError(f"observations name sensor {int(observations.sensor.max())} but the checkpoint "
                         f"has {n_gain} sensor gains (FilterConfig.n_sensors)")
    if np.any(observations.basin >= spec.n_basins):
        raise ValueError(f"observations name basin {int(observations.basin.max())}; the spec has {spec.n_basins}")
    drivers.check_against(spec)

    rng = checkpoint.rng()
    in_cycle = (observations.time_d > t0) & (observations.time_d <= t_end)
    raw = observations.select(in_cycle)
    windows = observe.aggregate_windows(raw, cfg.window_d,
                                        representativeness_fraction=cfg.representativeness_fraction)
    window_index = np.ceil(windows.time_d / cfg.window_d) - 1
    when = np.zeros(len(windows))
    for k in np.unique(window_index):  # loop over windows in the cycle, not members
        in_window = window_index == k
        when[in_window] = windows.time_d[in_window].mean()
    when = np.clip(when, np.nextafter(t0, np.inf), t_end)
    cyano = [g.is_cyanobacteria for g in spec.groups]
    G = spec.n_groups
    floor = cfg.state_floor_ugL

    # Bounds of the augmented parameters in log space: the spec's value (1 for
    # a gain) times or divided by cfg.parameter_bounds_factor.
    log_centre = np.zeros(len(checkpoint.names))
    if n_param:
        log_centre[s_param] = np.log(_spec_parameters(spec))
    log_span = math.log(cfg.parameter_bounds_factor)

    E = checkpoint.ensemble.copy()
    t = t0
    stops = list(np.unique(when)) + ([t_end] if (len(when) == 0 or when.max() < t_end) else [])
    messages, skipped = [], 0
    all_d, all_var, all_R, all_kind, times = [], [], [], [], []
    for stop in stops:
        if stop > t:
            params = {key: E[:, s_param][:, i * G:(i + 1) * G] for i, key in enumerate(PARAMETER_KEYS)} \
                if n_param else None
            try:
                x = integrate.advance(E[:, s_state], spec, drivers, t, stop, dt_d=cfg.dt_d, params=params)
            except (ValueError, FloatingPointError, np.linalg.LinAlgError) as exc:
                return CycleResult("failed", f"model advance from {t} to {stop} failed: {exc}", checkpoint,
                                   {"n_readings": len(raw), "n_obs": 0})
            if not np.all(np.isfinite(x)):
                return CycleResult("failed", f"model advance from {t} to {stop} gave non-finite values",
                                   checkpoint, {"n_readings": len(raw), "n_obs": 0})
            if cfg.model_error_log_sd_per_d > 0:
                z = transform.to_log(x, floor)
                z += cfg.model_error_log_sd_per_d * math.sqrt(stop - t) * rng.standard_normal(z.shape)
                x = transform.from_log(z)
            E[:, s_state] = x
            t = stop
        batch = windows.select(when == stop)
        if len(batch) == 0:
            continue
        Z = transform.to_log(E, floor)
        Z = inflation.inflate_multiplicative(Z, cfg.inflation, columns=s_state)
        Ef = transform.from_log(Z)
        H = observe.operator_matrix(batch, spec.n_basins, G, cyano)
        HE = observe.predict(Ef[:, s_state], Ef[:, s_gain], batch, H)
        R = batch.error_sd**2
        rho, rho_obs = _taper(cfg, spec, layout, batch, n_param, n_gain)
        try:
            with np.errstate(over="raise", invalid="raise", divide="raise", under="ignore"):
                Za = enkf.analysis(Z, HE, batch.value, R, method=cfg.method, rng=rng, rho=rho, rho_obs=rho_obs)
                Za[:, s_state] = inflation.relax_to_prior_spread(Z[:, s_state], Za[:, s_state],
                                                                  cfg.relaxation_to_prior_spread)
                if n_param + n_gain:
                    cols = np.r_[s_param.start:s_gain.stop]
                    Za[:, cols] = inflation.relax_to_prior_spread(Z[:, cols], Za[:, cols],
                                                                  cfg.parameter_relaxation)
                    Za = inflation.floor_spread(Za, cfg.parameter_sd_floor, columns=cols)
                    Za[:, cols] = np.clip(Za[:, cols], log_centre[cols] - log_span, log_centre[cols] + log_span)
                Ea = transform.from_log(Za)
            ok = bool(np.all(np.isfinite(Ea)))
        except (FloatingPointError, np.linalg.LinAlgError) as exc:
            ok, exc_text = False, str(exc)
        else:
            exc_text = "non-finite analysis"
        d = batch.value - HE.mean(axis=0)
        all_d.append(d)
        all_var.append(HE.var(axis=0, ddof=1))
        all_R.append(R)
        all_kind.append(batch.kind)
        times.append(float(stop))
        if ok:
            E = Ea
        else:
            skipped += 1
            messages.append(f"analysis at {stop} skipped ({exc_text}); forecast kept")

    diagnostics = {"n_readings": len(raw), "n_obs": int(sum(a.size for a in all_d)),
                   "analysis_times_d": times}
    if all_d:
        d, v, R, kinds = (np.concatenate(a) for a in (all_d, all_var, all_R, all_kind))
        stats = _innovation_stats(d, v, R)
        stats.pop("n")
        diagnostics.update(stats)
        diagnostics["by_kind"] = {k: _innovation_stats(d[kinds == k], v[kinds == k], R[kinds == k])
                                  for k in observe.OBSERVABLE_KINDS if np.any(kinds == k)}
    names = checkpoint.names
    aug = np.r_[s_param.start:s_gain.stop]
    diagnostics["parameter_mean"] = {names[j]: _json_float(E[:, j].mean()) for j in aug}
    diagnostics["parameter_sd"] = {names[j]: _json_float(E[:, j].std(ddof=1)) for j in aug}

    new = Checkpoint(time_d=t_end, ensemble=E, names=names, rng_state=rng.bit_generator.state)
    if skipped:
        status = "degraded"
    elif not all_d:
        status = "no_data"
        messages.append("no observations in the cycle; ensemble advanced without analysis")
    else:
        status = "ok"
    message = "; ".join(messages) if messages else f"analysed {diagnostics['n_obs']} windowed observations"
    return CycleResult(status, message, new, diagnostics)

