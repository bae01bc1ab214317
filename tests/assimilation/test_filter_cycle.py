"""The filter cycle's interface: statuses, diagnostics, split and input checks."""
import json

import numpy as np
import pytest
from filter_twin import FIRST_GUESS, T0_D, make_twin

from assimilation.augmentation import split
from assimilation.filter_config import FilterConfig
from assimilation.filter_cycle import assimilate, initial_checkpoint
from assimilation.observe import Observations
from assimilation.spec import StateLayout


@pytest.fixture(scope="module")
def twin():
    return make_twin(4, seed=5)


def _start(twin, **kw):
    cfg = FilterConfig(**{"members": 16, "n_sensors": 2, **kw})
    return cfg, initial_checkpoint(twin.spec, cfg, T0_D, np.random.default_rng(1), initial_state=FIRST_GUESS)


def test_cycle_without_readings_reports_no_data_and_advances(twin):
    cfg, ckpt = _start(twin)
    result = assimilate(ckpt, Observations.empty(), twin.spec, twin.drivers, cfg, T0_D + 1)
    assert result.status == "no_data"
    assert result.checkpoint.time_d == T0_D + 1
    assert result.diagnostics["n_obs"] == 0
    assert not np.array_equal(result.checkpoint.ensemble, ckpt.ensemble)


def test_cycle_diagnostics_are_json_ready_and_complete(twin):
    cfg, ckpt = _start(twin)
    result = assimilate(ckpt, twin.observations, twin.spec, twin.drivers, cfg, T0_D + 1)
    assert result.status == "ok"
    d = result.diagnostics
    json.dumps(d)
    # one window per (kind, basin, sensor) that reported in the day: 2 fluorescence + 1 phycocyanin
    assert d["n_obs"] == 3 and d["n_readings"] == 72
    for key in ("innovation_mean", "innovation_sd", "spread_error_ratio", "normalised_innovation_rms"):
        assert np.isfinite(d[key])
    assert set(d["by_kind"]) == {"chlorophyll_fluorescence", "phycocyanin"}
    assert set(d["parameter_mean"]) == {n for n in ckpt.names if ":" in n and n.split(":")[0] in
                                        ("mu_max_20_per_d", "mortality_20_per_d", "sensor_gain")}


def test_readings_outside_the_cycle_are_not_analysed(twin):
    cfg, ckpt = _start(twin)
    result = assimilate(ckpt, twin.observations, twin.spec, twin.drivers, cfg, T0_D + 0.5)
    assert result.diagnostics["n_readings"] == 36  # hours 1..12 of three hourly streams
    assert max(result.diagnostics["analysis_times_d"]) <= T0_D + 0.5


def test_split_gives_model_states_parameters_and_gains(twin):
    cfg, ckpt = _start(twin)
    states, params, gains = split(ckpt, twin.spec)
    layout = StateLayout(twin.spec)
    assert states.shape == (16, layout.n_state)
    assert set(params) == {"mu_max_20_per_d", "mortality_20_per_d"}
    assert params["mu_max_20_per_d"].shape == (16, twin.spec.n_groups)
    assert gains.shape == (16, 2)
    assert np.all(states > 0) and np.all(gains > 0)


def test_without_parameter_estimation_params_are_empty(twin):
    cfg, ckpt = _start(twin, estimate_parameters=False)
    _, params, _ = split(ckpt, twin.spec)
    assert params == {}
    assert assimilate(ckpt, twin.observations, twin.spec, twin.drivers, cfg, T0_D + 1).status == "ok"


def test_sensor_index_beyond_configured_gains_is_rejected(twin):
    cfg, ckpt = _start(twin)
    obs = Observations([T0_D + 0.5], ["chlorophyll_fluorescence"], [0], [5], [3.0], [0.3])
    with pytest.raises(ValueError, match="sensor 5"):
        assimilate(ckpt, obs, twin.spec, twin.drivers, cfg, T0_D + 1)


def test_end_before_checkpoint_is_rejected(twin):
    cfg, ckpt = _start(twin)
    with pytest.raises(ValueError, match="must not be before"):
        assimilate(ckpt, Observations.empty(), twin.spec, twin.drivers, cfg, T0_D - 1)


def test_config_rejects_unknown_method():
    with pytest.raises(ValueError, match="method must be one of"):
        FilterConfig(method="particle")


def test_model_failure_is_reported_as_failed_status(twin):
    cfg, ckpt = _start(twin)
    # Drivers end after 5 days: a cycle far beyond them cannot be advanced.
    result = assimilate(ckpt, Observations.empty(), twin.spec, twin.drivers, cfg, T0_D + 400)
    assert result.status == "failed"
    assert result.checkpoint is ckpt


def test_parameters_stay_within_their_bounds(twin):
    # A guard against drift: a parameter far outside the bound after an
    # analysis is pulled back to the spec's value times the factor.
    cfg, ckpt = _start(twin, parameter_bounds_factor=1.5)
    j = ckpt.names.index("mu_max_20_per_d:cyanobacteria")
    ckpt.ensemble[:, j] *= 5.0
    result = assimilate(ckpt, twin.observations, twin.spec, twin.drivers, cfg, T0_D + 1)
    mu = split(result.checkpoint, twin.spec)[1]["mu_max_20_per_d"][:, 1]
    assert np.all(mu <= 1.5 * twin.spec.groups[1].mu_max_20_per_d * (1 + 1e-12))


@pytest.mark.parametrize("hops, dam_pool_moves", [(0.5, False), (np.inf, True)])
def test_localization_along_the_network_confines_an_observation(twin, hops, dam_pool_moves):
    # Gaspari–Cohn with half-width 0.5 hop is zero from 1 hop on (Gaspari and
    # Cohn 1999), so a reading in reed_arm cannot change dam_pool, two hops
    # downstream; without localization it can.
    cfg, ckpt = _start(twin, localization_hops=hops, estimate_parameters=False, n_sensors=0, inflation=1.0)
    obs = Observations([T0_D + 1.0], ["chlorophyll_a"], [0], [-1], [9.0], [0.3])
    with_obs = assimilate(ckpt, obs, twin.spec, twin.drivers, cfg, T0_D + 1).checkpoint.ensemble
    without = assimilate(ckpt, Observations.empty(), twin.spec, twin.drivers, cfg, T0_D + 1).checkpoint.ensemble
    layout = StateLayout(twin.spec)
    arm = [layout.index_chlorophyll(0, g) for g in range(twin.spec.n_groups)]
    dam = [layout.index_nitrogen(2)] + [layout.index_chlorophyll(2, g) for g in range(twin.spec.n_groups)]
    assert not np.allclose(with_obs[:, arm], without[:, arm])
    assert np.allclose(with_obs[:, dam], without[:, dam], rtol=1e-12, atol=0) != dam_pool_moves
