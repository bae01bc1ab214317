"""The Bloomline filter cycle over the nutrient–phytoplankton model.

One cycle (:func:`assimilate`) takes the last checkpoint, the new QC-passed
readings, the drivers and the spec, and returns the next checkpoint with
diagnostics. Readings are aggregated into windows
(:func:`assimilation.observe.aggregate_windows`); the ensemble is advanced
by the model (:func:`assimilation.integrate.advance`) to the end of each
window in turn and analysed there. The steps of one window: advance (with
stochastic model error), predict (inflation, predicted observations),
analysis (:func:`assimilation.enkf.analysis` in log space) and
post-processing (relaxation, parameter spread floor and bounds); the
cycle's diagnostics follow (:mod:`assimilation.innovations`).

Time means (a whole-day value, ``Observations.span_d`` > 0) are analysed
at the end of their span against each member's mean over the span, the
time-averaged observation of Dirren and Hakim (2005, Geophys. Res. Lett.
32:L04804): the update uses the ensemble covariance between the state at
the span's end and the members' span means. The members' path is sampled
at the model step during the cycle; the part of a span before the cycle's
checkpoint is not known, so the mean is over the part inside the cycle, and
a path that crosses an earlier analysis of the same cycle is taken as the
members ran it (before and after that analysis) — an approximation of
Bloomline's, exact when the cycles and the days share their ends.

Censored readings (below a detection limit) are skipped when the prior
mean is already below the limit, else assimilated as L/2 ± L/2
(:func:`assimilation.observe.censored_as_observations`).

The ensemble carries the model state, group parameters and sensor gains
(:mod:`assimilation.augmentation`); the settings are a
:class:`assimilation.filter_config.FilterConfig`. Inflation: multiplicative
on the model state (Anderson and Anderson 1999, Mon. Wea. Rev. 127:2741)
and relaxation to prior spread on all columns (Whitaker and Hamill 2012,
Mon. Wea. Rev. 140:3078). Localization: a Gaspari–Cohn taper of the hop
distance between basins along the flow network
(:func:`augmentation.localization_weights`).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from assimilation import augmentation, enkf, inflation, integrate, observe, transform
from assimilation.checkpoint import Checkpoint
from assimilation.filter_config import FilterConfig
from assimilation.first_guess import DEFAULT_FIRST_GUESS
from assimilation.innovations import InnovationLog, json_float
from assimilation.observe import Observations, censored_as_observations
from assimilation.spec import Drivers, ModelSpec, StateLayout

__all__ = ["CycleResult", "assimilate", "initial_checkpoint"]


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


def initial_checkpoint(spec: ModelSpec, cfg: FilterConfig, time_d: float, rng: np.random.Generator, *,
                       initial_state: np.ndarray | None = None) -> Checkpoint:
    """The first checkpoint: members spread about a first guess.

    initial_state (n_state,) [µg/L] first guess (default:
    :data:`assimilation.first_guess.DEFAULT_FIRST_GUESS` in every basin).
    Each member is the first guess times a log-normal factor (sd
    ``cfg.initial_state_log_sd``); parameters are the spec's values times
    log-normal factors (``parameter_log_sd``); gains are log-normal about 1
    (``gain_log_sd``). The generator for later cycles is seeded from ``rng``.
    """
    layout = StateLayout(spec)
    if initial_state is None:
        initial_state = DEFAULT_FIRST_GUESS.state(spec)
    x0 = np.asarray(initial_state, dtype=float).ravel()
    if x0.shape != (layout.n_state,) or not np.all(np.isfinite(x0)) or np.any(x0 < 0):
        raise ValueError(f"initial_state must be ({layout.n_state},) non-negative µg/L, got shape {x0.shape}")
    M = int(cfg.members)
    z0 = transform.to_log(x0, cfg.state_floor_ugL)
    columns = [z0 + cfg.initial_state_log_sd * rng.standard_normal((M, layout.n_state))]
    if cfg.estimate_parameters:
        theta = augmentation.spec_parameters(spec)
        if np.any(~(theta > 0)):
            raise ValueError("estimated group parameters (mu_max, mortality) must be > 0 in the spec")
        columns.append(np.log(theta) + cfg.parameter_log_sd * rng.standard_normal((M, theta.size)))
    if cfg.n_sensors:
        columns.append(cfg.gain_log_sd * rng.standard_normal((M, cfg.n_sensors)))
    ensemble = transform.from_log(np.concatenate(columns, axis=1))
    child = np.random.default_rng(int(rng.integers(0, 2**63 - 1)))
    names = augmentation.augmented_names(spec, estimate_parameters=cfg.estimate_parameters,
                                         n_sensors=cfg.n_sensors)
    return Checkpoint(time_d=float(time_d), ensemble=ensemble, names=names, rng_state=child.bit_generator.state)


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
    cols = _check_inputs(checkpoint, observations, spec, drivers, t_end_d)
    t0 = checkpoint.time_d
    t_end = float(t_end_d)
    rng = checkpoint.rng()
    # copies: censored readings' values and errors are replaced for the analysis
    raw = observations.select(np.nonzero((observations.time_d > t0) & (observations.time_d <= t_end))[0])
    windows = observe.aggregate_windows(raw, cfg.window_d,
                                        representativeness_fraction=cfg.representativeness_fraction)
    when = _analysis_times(windows, t0, t_end, cfg.window_d)
    try:
        E, log, problems = _run_windows(checkpoint.ensemble.copy(), windows, when, t0, t_end,
                                        spec, drivers, cfg, cols, rng)
    except _AdvanceFailed as exc:
        return CycleResult("failed", str(exc), checkpoint, {"n_readings": len(raw), "n_obs": 0})
    diagnostics = _diagnostics(len(raw), log, E, checkpoint.names, cols)
    new = Checkpoint(time_d=t_end, ensemble=E, names=checkpoint.names, rng_state=rng.bit_generator.state)
    return _result(new, diagnostics, log, problems)


class _AdvanceFailed(Exception):
    """The model could not be advanced over a window; the message says why."""


def _check_inputs(checkpoint, observations, spec: ModelSpec, drivers: Drivers, t_end_d) -> augmentation.Columns:
    """Check the arguments of :func:`assimilate`; returns the checkpoint's columns."""
    if not isinstance(checkpoint, Checkpoint):
        raise TypeError(f"checkpoint must be a Checkpoint, got {type(checkpoint).__name__}")
    if not isinstance(observations, Observations):
        raise TypeError(f"observations must be Observations, got {type(observations).__name__}")
    t0 = checkpoint.time_d
    t_end = float(t_end_d)
    if not t_end >= t0:
        raise ValueError(f"t_end_d ({t_end}) must not be before the checkpoint time ({t0})")
    cols = augmentation.columns(spec, checkpoint.names)
    if np.any(observations.sensor >= cols.n_gains):
        raise ValueError(f"observations name sensor {int(observations.sensor.max())} but the checkpoint "
                         f"has {cols.n_gains} sensor gains (FilterConfig.n_sensors)")
    if np.any(observations.basin >= spec.n_basins):
        raise ValueError(f"observations name basin {int(observations.basin.max())}; the spec has {spec.n_basins}")
    drivers.check_against(spec)
    return cols


def _analysis_times(windows: Observations, t0: float, t_end: float, window_d: float) -> np.ndarray:
    """Analysis time of each windowed observation [epoch days]: the mean time of
    its window's instant readings (a time mean: its own end), kept within (t0, t_end]."""
    window_index = np.ceil(windows.time_d / window_d) - 1
    instant = windows.span_d == 0
    when = windows.time_d.copy()
    for k in np.unique(window_index[instant]):  # loop over windows in the cycle, not members
        in_window = instant & (window_index == k)
        when[in_window] = windows.time_d[in_window].mean()
    return np.clip(when, np.nextafter(t0, np.inf), t_end)


class _Path:
    """The members' model states sampled along the cycle, for the span means of time-mean readings."""

    def __init__(self):
        self.times: list[np.ndarray] = []
        self.states: list[np.ndarray] = []

    def add(self, times: np.ndarray, states: np.ndarray) -> None:
        """States (S, M, n_state) [µg/L] at times (S,) [epoch days], in time order after what was added."""
        self.times.append(times)
        self.states.append(states)

    def mean(self, lo: float, hi: float) -> np.ndarray:
        """Each member's time mean over [lo, hi] (trapezoidal rule over the samples inside), (M, n_state)."""
        t = np.concatenate(self.times)
        x = np.concatenate(self.states)
        inside = (t >= lo - 1e-9) & (t <= hi + 1e-9)
        t, x = t[inside], x[inside]
        if t.size < 2 or not t[-1] > t[0]:
            return x[-1]
        return np.trapezoid(x, t, axis=0) / (t[-1] - t[0])


def _run_windows(E, windows, when, t0, t_end, spec, drivers, cfg, cols, rng):
    """The window loop: advance to each analysis time in turn and analyse there,
    then advance to t_end. Returns (ensemble (M, n_aug), InnovationLog, messages
    of skipped analyses); raises _AdvanceFailed."""
    bounds = augmentation.parameter_bounds(spec, cols, cfg.parameter_bounds_factor)
    log, problems = InnovationLog(), []
    t = t0
    path = _Path() if np.any(windows.span_d > 0) else None
    stops = list(np.unique(when)) + ([t_end] if (len(when) == 0 or when.max() < t_end) else [])
    for stop in stops:
        if stop > t:
            E[:, cols.state] = _advance(E, t, stop, spec, drivers, cfg, cols, rng, path)
            t = stop
        batch = windows.select(np.nonzero(when == stop)[0])
        if len(batch) == 0:
            continue
        Z, HE = _predict(E, batch, spec, cfg, cols, path, t0)
        if batch.censored.any():
            use = censored_as_observations(batch, HE)
            batch, HE = batch.select(use), HE[:, use]
            if len(batch) == 0:
                continue
        R = batch.error_sd**2
        Ea, problem = _analyse(Z, HE, batch, R, spec, cfg, cols, bounds, rng)
        log.add(batch, HE, R, stop)
        if problem is None:
            E = Ea
        else:
            problems.append(f"analysis at {stop} skipped ({problem}); forecast kept")
    return E, log, problems


def _advance(E, t, stop, spec, drivers, cfg, cols, rng, path: _Path | None = None) -> np.ndarray:
    """Model states (M, n_state) [µg/L] advanced from t to stop [epoch days] with
    each member's parameters, plus stochastic model error; raises _AdvanceFailed.
    With ``path`` the states at every model step are added to it."""
    params = augmentation.parameter_dict(E[:, cols.parameters], spec.n_groups) if cols.n_parameters else None
    try:
        if path is None:
            x = integrate.advance(E[:, cols.state], spec, drivers, t, stop, dt_d=cfg.dt_d, params=params)
        else:
            steps = max(1, math.ceil((stop - t) / cfg.dt_d - 1e-9))  # the grid integrate.advance takes
            times = np.linspace(t, stop, steps + 1)
            states = integrate.simulate(E[:, cols.state], spec, drivers, t, times, dt_d=cfg.dt_d, params=params)
            path.add(times, states)
            x = states[-1]
    except (ValueError, FloatingPointError, np.linalg.LinAlgError) as exc:
        raise _AdvanceFailed(f"model advance from {t} to {stop} failed: {exc}") from exc
    if not np.all(np.isfinite(x)):
        raise _AdvanceFailed(f"model advance from {t} to {stop} gave non-finite values")
    return _add_model_error(x, stop - t, cfg, rng)


def _add_model_error(x: np.ndarray, span_d: float, cfg: FilterConfig, rng) -> np.ndarray:
    """States x [µg/L] times a log-normal random-walk factor with sd
    ``cfg.model_error_log_sd_per_d``·sqrt(span_d) (stochastic model error; a
    no-op when that sd is 0)."""
    if not cfg.model_error_log_sd_per_d > 0:
        return x
    z = transform.to_log(x, cfg.state_floor_ugL)
    z += cfg.model_error_log_sd_per_d * math.sqrt(span_d) * rng.standard_normal(z.shape)
    return transform.from_log(z)


def _predict(E, batch: Observations, spec: ModelSpec, cfg: FilterConfig, cols, path: _Path | None = None,
             t0: float = -np.inf):
    """The inflated ensemble in log space Z (M, n_aug) and its predicted
    observations HE (M, p) [observation units]; a time mean's from the members'
    mean over its span since ``t0`` (inflated alike)."""
    Z = transform.to_log(E, cfg.state_floor_ugL)
    Z = inflation.inflate_multiplicative(Z, cfg.inflation, columns=cols.state)
    Ef = transform.from_log(Z)
    cyano = [g.is_cyanobacteria for g in spec.groups]
    H = observe.operator_matrix(batch, spec.n_basins, spec.n_groups, cyano)
    HE = observe.predict(Ef[:, cols.state], Ef[:, cols.gains], batch, H)
    spans = np.nonzero(batch.span_d > 0)[0]
    if path is not None and spans.size:
        for span in np.unique(batch.span_d[spans]):  # a few distinct spans (days of 23, 24, 25 h)
            sel = spans[batch.span_d[spans] == span]
            end = float(batch.time_d[sel].max())
            mean = path.mean(max(t0, end - float(span)), end)
            zm = inflation.inflate_multiplicative(transform.to_log(mean, cfg.state_floor_ugL), cfg.inflation)
            sub = batch.select(sel)
            HE[:, sel] = observe.predict(transform.from_log(zm), Ef[:, cols.gains], sub, H[sel])
    return Z, HE


def _analyse(Z, HE, batch: Observations, R, spec: ModelSpec, cfg: FilterConfig, cols, bounds, rng):
    """Analysis of one window: (analysis ensemble (M, n_aug) in physical units, None),
    or (None, reason) when numerical trouble means it must be skipped."""
    rho, rho_obs = augmentation.localization_weights(spec, cols, batch, cfg.localization_hops)
    try:
        with np.errstate(over="raise", invalid="raise", divide="raise", under="ignore"):
            Za = enkf.analysis(Z, HE, batch.value, R, method=cfg.method, rng=rng, rho=rho, rho_obs=rho_obs)
            Ea = transform.from_log(_post_process(Z, Za, cfg, cols, bounds))
        if not np.all(np.isfinite(Ea)):
            return None, "non-finite analysis"
    except (FloatingPointError, np.linalg.LinAlgError) as exc:
        return None, str(exc)
    return Ea, None


def _post_process(Z, Za, cfg: FilterConfig, cols, bounds):
    """Relaxation to prior spread on the model state, then the parameter and
    gain constraints (:func:`augmentation.constrain_parameters`); log space."""
    Za[:, cols.state] = inflation.relax_to_prior_spread(Z[:, cols.state], Za[:, cols.state],
                                                        cfg.relaxation_to_prior_spread)
    if cols.n_parameters + cols.n_gains:
        Za = augmentation.constrain_parameters(Z, Za, cols, relaxation=cfg.parameter_relaxation,
                                               sd_floor=cfg.parameter_sd_floor, bounds=bounds)
    return Za


def _diagnostics(n_readings: int, log: InnovationLog, E, names, cols) -> dict:
    """The cycle's JSON-ready diagnostics (see :func:`assimilate`)."""
    diagnostics = {"n_readings": n_readings, "n_obs": log.n_obs, "analysis_times_d": log.times_d}
    diagnostics.update(log.summary())
    aug = cols.augmented
    diagnostics["parameter_mean"] = {names[j]: json_float(E[:, j].mean()) for j in aug}
    diagnostics["parameter_sd"] = {names[j]: json_float(E[:, j].std(ddof=1)) for j in aug}
    return diagnostics


def _result(new: Checkpoint, diagnostics: dict, log: InnovationLog, problems: list[str]) -> CycleResult:
    """Status and message of a cycle that advanced to its end."""
    messages = list(problems)
    if problems:
        status = "degraded"
    elif not log.n_windows:
        status = "no_data"
        messages.append("no observations in the cycle; ensemble advanced without analysis")
    else:
        status = "ok"
    message = "; ".join(messages) if messages else f"analysed {diagnostics['n_obs']} windowed observations"
    return CycleResult(status, message, new, diagnostics)
