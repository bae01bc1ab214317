"""Settings of the Bloomline filter cycle (:func:`assimilation.filter_cycle.assimilate`).

One frozen dataclass, checked when it is made, so a bad setting fails at
configuration time with a message naming the field. The meaning of each
setting and its default are in :class:`FilterConfig`.
"""
from __future__ import annotations

from dataclasses import dataclass

from assimilation import enkf, observe


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
