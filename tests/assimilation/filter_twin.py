"""An invented three-basin reservoir and seeded synthetic readings for the filter checks.

Everything is fictional: a shallow "reed_arm" flows into "open_water", which
flows into "dam_pool"; one creek feeds the arm. The truth is Bloomline's own
model with known parameters (an identical twin); readings are the truth plus
white Gaussian noise of a stated standard deviation.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from assimilation import integrate
from assimilation.observe import Observations
from assimilation.parameters import default_spec
from assimilation.spec import Basin, Drivers, Network, StateLayout

T0_D = 20605.0  # 2026-06-01T00:00Z in epoch days
CYANO = 1  # index of the cyanobacteria group in parameters.default_groups()
#: Truth parameters: the spec's values except a cyanobacteria growth rate
#: 25 % above the spec's (the filter's prior mean), which the filter must learn.
TRUE_GROWTH_FACTOR = 1.25
SENSOR_GAINS = (1.15, 0.9)  # true gains of the two fluorescence sensors
#: Filter settings of a perfect-model twin: no inflation of the model state
#: and no stochastic model error (there is none to make up for); everything else, including the
#: parameters' relaxation and spread floor, is FilterConfig's default.
TWIN_SETTINGS = dict(inflation=1.0, relaxation_to_prior_spread=0.0, model_error_log_sd_per_d=0.0)


def spec(sediment_release_mg_m2_d=0.0):
    """The twin's spec. No sediment release by default, so the filter estimates the group
    parameters only (the estimate of the release has its own twin, test_sediment_release_estimate.py)."""
    basins = (Basin("reed_arm", 2.0e6, 3.0, 6.7e5), Basin("open_water", 5.0e6, 5.0, 1.0e6),
              Basin("dam_pool", 4.0e6, 8.0, 5.0e5))
    s = default_spec(basins, Network(downstream=(1, 2, -1), inflow_basin=(0,)))
    return replace(s, sediment_phosphorus_release_20_mg_m2_d=sediment_release_mg_m2_d)


def drivers(days=120):
    """Hourly drivers: water warming from 15 to 26 °C over 60 days, clear-sky sun, steady creek."""
    t = T0_D + np.arange(0.0, days + 1e-9, 1.0 / 24.0)
    day = t - T0_D
    temp = 15.0 + 11.0 * np.clip(day / 60.0, 0.0, 1.0) + 0.5 * np.sin(2 * np.pi * (day - 0.375))
    sun = np.maximum(0.0, 700.0 * np.sin(2 * np.pi * (day % 1.0 - 0.25)))
    ones = np.ones((t.size, 1))
    return Drivers(time_d=t, water_temperature_C=temp[:, None] + np.array([1.0, 0.0, -1.0]),
                   shortwave_W_m2=sun, inflow_m3_s=1.0 * ones, inflow_nitrogen_ugL=250.0 * ones,
                   inflow_phosphorus_ugL=40.0 * ones)


def true_parameters(s):
    mu = np.array([[g.mu_max_20_per_d for g in s.groups]])
    mu[0, CYANO] *= TRUE_GROWTH_FACTOR
    return {"mu_max_20_per_d": mu,
            "mortality_20_per_d": np.array([[g.mortality_20_per_d for g in s.groups]])}


TRUE_INITIAL_STATE = np.tile([300.0, 25.0, 40.0, 5.0, 0.5, 0.3], 3)  # [N, P, DN, DP, A_green, A_cyano] µg/L
FIRST_GUESS = np.tile([250.0, 20.0, 30.0, 4.0, 0.8, 0.5], 3)


@dataclass
class Twin:
    spec: object
    drivers: Drivers
    hours_d: np.ndarray  # (S,) epoch days of the hourly truth
    truth: np.ndarray  # (S, n_state)
    observations: Observations
    sensor_error_rms: float  # rms standard deviation of the hourly fluorescence readings [µg/L]


def truth_run(days: int):
    """The twin's truth: (spec, drivers, layout, hourly times [epoch days], hourly states (S, n_state))."""
    s = spec()
    drv = drivers(days + 1)
    layout = StateLayout(s)
    hours = T0_D + np.arange(1, days * 24 + 1) / 24.0
    truth = integrate.simulate(TRUE_INITIAL_STATE[None], s, drv, T0_D, hours, params=true_parameters(s))[:, 0]
    return s, drv, layout, hours, truth


def make_twin(days: int, seed: int) -> Twin:
    """Truth run and synthetic readings: hourly chlorophyll fluorescence in the arm
    (sensor 0) and open water (sensor 1), hourly phycocyanin in the arm, weekly
    lab chlorophyll-a, nitrate and SRP in every basin."""
    s, drv, layout, hours, truth = truth_run(days)
    rng = np.random.default_rng(seed)
    chl = layout.total_chlorophyll(truth)
    cyano = layout.chlorophyll(truth)[:, :, CYANO]
    parts = []

    def add(t, kind, basin, sensor, value, rel, floor):
        sd = rel * value + floor
        parts.append((t, np.full(t.size, kind), np.full(t.size, basin), np.full(t.size, sensor),
                      value + sd * rng.standard_normal(value.shape), sd))

    for b, k in ((0, 0), (1, 1)):
        add(hours, "chlorophyll_fluorescence", b, k, SENSOR_GAINS[k] * chl[:, b], 0.10, 0.3)
    add(hours, "phycocyanin", 0, -1, cyano[:, 0], 0.15, 0.3)
    weekly = np.arange(24 * 7 - 14, hours.size, 24 * 7)  # 10:00 once a week
    for b in range(3):
        add(hours[weekly], "chlorophyll_a", b, -1, chl[weekly, b], 0.05, 0.2)
        add(hours[weekly], "nitrate", b, -1, layout.nitrogen(truth)[weekly, b], 0.05, 2.0)
        add(hours[weekly], "srp", b, -1, layout.phosphorus(truth)[weekly, b], 0.05, 0.5)
    obs = Observations(*(np.concatenate([p[i] for p in parts]) for i in range(6)))
    sensor_sd = np.concatenate([parts[0][5], parts[1][5]])
    return Twin(s, drv, hours, truth, obs, float(np.sqrt(np.mean(sensor_sd**2))))
