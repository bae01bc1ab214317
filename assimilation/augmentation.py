"""State augmentation: model state, group parameters and sensor gains in one ensemble.

Augmented ensemble (columns of ``Checkpoint.ensemble``, physical units)::

    [model state (n_state, µg/L, basin-major, DEVELOPERS.md),
     mu_max_20_per_d:<group> (G, 1/d),   mortality_20_per_d:<group> (G, 1/d),
     sediment_phosphorus_release_20_mg_m2_d:<basin> (B, mg P/m²/d),
     sensor_gain:<k> (n_sensors, -)]

Parameter columns are present when parameters are estimated (the sediment
release columns only when every basin's release in the spec, the prior, is
positive: :func:`estimates_sediment_release`); sensor gains whenever there
are sensors. The analysis works in log space for every
column (concentrations and positive parameters, :mod:`transform`), so all
stay positive. State augmentation for parameters follows Anderson (2001,
Mon. Wea. Rev. 129:2884) and Evensen (2009, Data Assimilation: the Ensemble
Kalman Filter, 2nd ed., Springer, ch. 10); the spread of the parameters is
kept above a floor to avoid collapse (Aksoy et al. 2006, Mon. Wea. Rev.
134:2951) and each member's parameters within bounds about the spec's
values. For localization, group parameters are global and not localized; a basin's
sediment release and a sensor gain are localized like the state of their
basin.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from assimilation import inflation, localization
from assimilation.checkpoint import Checkpoint
from assimilation.model import BASIN_PARAMETER_KEYS, PARAMETER_KEYS
from assimilation.observe import Observations
from assimilation.spec import ModelSpec, StateLayout

GAIN_PREFIX = "sensor_gain"


def estimates_sediment_release(spec: ModelSpec) -> bool:
    """Whether an ensemble that estimates parameters also estimates each basin's
    sediment phosphorus release: when every basin's release in the spec (the
    prior, log space) is positive. A zero release means no internal loading."""
    return bool(np.all(spec.sediment_release_by_basin() > 0))


def augmented_names(spec: ModelSpec, *, estimate_parameters: bool, n_sensors: int) -> tuple[str, ...]:
    """Column names of the augmented ensemble: the state layout's names, then
    ``<parameter key>:<group name>`` when parameters are estimated, then
    ``<basin parameter key>:<basin name>`` when the sediment release is
    estimated too, then ``sensor_gain:<k>`` for k < n_sensors."""
    names = list(StateLayout(spec).names())
    if estimate_parameters:
        for key in PARAMETER_KEYS:
            names += [f"{key}:{g.name}" for g in spec.groups]
        if estimates_sediment_release(spec):
            for key in BASIN_PARAMETER_KEYS:
                names += [f"{key}:{b.name}" for b in spec.basins]
    names += [f"{GAIN_PREFIX}:{k}" for k in range(n_sensors)]
    return tuple(names)


def spec_parameters(spec: ModelSpec) -> np.ndarray:
    """Spec values of the augmented parameters: group parameters
    (len(PARAMETER_KEYS) * G,) [1/d], then each basin's sediment release
    (B,) [mg P/m²/d] when it is estimated."""
    theta = [getattr(g, key) for key in PARAMETER_KEYS for g in spec.groups]
    if estimates_sediment_release(spec):
        theta += list(spec.sediment_release_by_basin())
    return np.array(theta, dtype=float)


@dataclass(frozen=True, eq=False)
class Columns:
    """Where each part of an augmented ensemble lies: slices of the model
    state, the group parameters and the sensor gains, and the state layout."""

    layout: StateLayout
    state: slice
    parameters: slice
    gains: slice

    @property
    def n_parameters(self) -> int:
        return self.parameters.stop - self.parameters.start

    @property
    def n_gains(self) -> int:
        return self.gains.stop - self.gains.start

    @property
    def augmented(self) -> np.ndarray:
        """Indices of the parameter and gain columns together."""
        return np.r_[self.parameters.start:self.gains.stop]


def columns(spec: ModelSpec, names: tuple[str, ...]) -> Columns:
    """The :class:`Columns` of an ensemble with column ``names`` for ``spec``;
    ValueError when the names do not fit the spec."""
    layout = StateLayout(spec)
    n_state = layout.n_state
    _refuse_old_layout(names, spec)
    n_param = sum(1 for n in names if n.split(":")[0] in PARAMETER_KEYS + BASIN_PARAMETER_KEYS)
    n_gain = sum(1 for n in names if n.startswith(GAIN_PREFIX + ":"))
    expected = augmented_names(spec, estimate_parameters=n_param > 0, n_sensors=n_gain)
    if n_state + n_param + n_gain != len(names) or tuple(names[n_state:]) != expected[n_state:]:
        raise ValueError(f"checkpoint columns {len(names)} do not fit the spec "
                         f"({n_state} state, {n_param} parameters, {n_gain} gains; expected "
                         f"{len(expected) - n_state - n_gain} parameters)")
    if tuple(names[:n_state]) != tuple(layout.names()):
        raise ValueError("checkpoint state columns do not match the spec's state layout")
    return Columns(layout, slice(0, n_state), slice(n_state, n_state + n_param),
                   slice(n_state + n_param, len(names)))


def _refuse_old_layout(names, spec: ModelSpec) -> None:
    """ValueError with what to do when ``names`` begin with the state layout of
    ``spec`` from before the detrital pools (per basin DIN, SRP and chlorophyll)."""
    old = [name for b in spec.basins
           for name in [f"{b.name}:nitrogen", f"{b.name}:phosphorus"] + [f"{b.name}:chl:{g.name}" for g in spec.groups]]
    if tuple(names[:len(old)]) == tuple(old):
        raise ValueError("the checkpoint holds the model state without detrital N and P pools (written before "
                         "Bloomline's model had detritus); it cannot be resumed: remove this water body's stored "
                         "checkpoints so that the next cycle starts from a first guess")


def parameter_dict(theta: np.ndarray, n_groups: int) -> dict[str, np.ndarray]:
    """The parameter columns ``theta`` (M, len(PARAMETER_KEYS) * G [+ B]) as the
    ``params`` dict of ``integrate.advance``: keys PARAMETER_KEYS, views (M, G)
    [1/d], and, when theta holds more columns, the basins' sediment release
    (BASIN_PARAMETER_KEYS, view (M, B) [mg P/m²/d])."""
    G = n_groups
    out = {key: theta[:, i * G:(i + 1) * G] for i, key in enumerate(PARAMETER_KEYS)}
    if theta.shape[1] > len(PARAMETER_KEYS) * G:
        (key,) = BASIN_PARAMETER_KEYS
        out[key] = theta[:, len(PARAMETER_KEYS) * G:]
    return out


def split(checkpoint: Checkpoint, spec: ModelSpec) -> tuple[np.ndarray, dict[str, np.ndarray], np.ndarray]:
    """Model states (M, n_state) [µg/L], params dict for ``integrate.advance``
    (:func:`parameter_dict`; empty when parameters are not estimated) and
    sensor gains (M, n_sensors) [-], all copies."""
    cols = columns(spec, checkpoint.names)
    E = checkpoint.ensemble
    params = {}
    if cols.n_parameters:
        params = {key: value.copy() for key, value in parameter_dict(E[:, cols.parameters], spec.n_groups).items()}
    return E[:, cols.state].copy(), params, E[:, cols.gains].copy()


@dataclass(frozen=True, eq=False)
class ParameterBounds:
    """Log-space bounds of the augmented columns (``Columns.augmented``):
    the spec's value (1 for a gain) times or divided by a factor."""

    lower: np.ndarray
    upper: np.ndarray


def parameter_bounds(spec: ModelSpec, cols: Columns, factor: float) -> ParameterBounds:
    """Bounds of each augmented column: spec value ÷ factor … spec value × factor, in log units."""
    log_centre = np.zeros(cols.gains.stop)
    if cols.n_parameters:
        log_centre[cols.parameters] = np.log(spec_parameters(spec))
    log_span = math.log(factor)
    aug = cols.augmented
    return ParameterBounds(log_centre[aug] - log_span, log_centre[aug] + log_span)


def constrain_parameters(Z_prior: np.ndarray, Z_post: np.ndarray, cols: Columns, *, relaxation: float,
                         sd_floor: float, bounds: ParameterBounds) -> np.ndarray:
    """Keep the augmented columns of an analysis (log space, (M, n_aug)) healthy.

    In turn: relaxation to prior spread with alpha ``relaxation`` [-]
    (Whitaker and Hamill 2012, Mon. Wea. Rev. 140:3078), a spread floor of
    ``sd_floor`` [log units] (Aksoy et al. 2006) and the ``bounds``.
    Z_post is changed in place; returns the constrained ensemble.
    """
    aug = cols.augmented
    Z_post[:, aug] = inflation.relax_to_prior_spread(Z_prior[:, aug], Z_post[:, aug], relaxation)
    Z_post = inflation.floor_spread(Z_post, sd_floor, columns=aug)
    Z_post[:, aug] = np.clip(Z_post[:, aug], bounds.lower, bounds.upper)
    return Z_post


def localization_weights(spec: ModelSpec, cols: Columns, obs: Observations, half_width_hops: float):
    """Gaspari–Cohn weights of the augmented columns and of the observations.

    half_width_hops [hops] along the flow network (Gaspari and Cohn 1999,
    :mod:`localization`); 0 or inf switches localization off. Returns
    (rho (n_aug, p), rho_obs (p, p)), or (None, None) when off. State columns
    and a basin's sediment release take the weight of their basin, group
    parameters 1, a sensor gain the weight of the basin of that sensor's
    readings.
    """
    c = half_width_hops
    if c == 0 or math.isinf(c):
        return None, None
    hops = localization.network_hops(spec.network.downstream)
    rho_basin = localization.gaspari_cohn(hops, c)                 # (B, B)
    state_basin = np.repeat(np.arange(spec.n_basins), cols.layout.n_per_basin)
    n_basin_params = cols.n_parameters - len(PARAMETER_KEYS) * spec.n_groups if cols.n_parameters else 0
    rows = [rho_basin[state_basin][:, obs.basin], np.ones((cols.n_parameters - n_basin_params, len(obs))),
            rho_basin[np.arange(n_basin_params) % spec.n_basins][:, obs.basin]]
    gain_rows = np.zeros((cols.n_gains, len(obs)))
    for k in range(cols.n_gains):  # loop over sensors (a few), not members
        own = np.nonzero(obs.sensor == k)[0]
        if own.size:
            gain_rows[k] = rho_basin[obs.basin[own[0]], obs.basin]
    rows.append(gain_rows)
    return np.concatenate(rows, axis=0), rho_basin[obs.basin][:, obs.basin]
