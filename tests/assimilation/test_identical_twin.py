"""Identical twin with Bloomline's own model (Evensen 2009, Data Assimilation, ch. 9:
the truth is a model run with known parameters, the readings are the truth plus
noise of known size, and the filter must track the truth and learn the parameters).

The twin is a perfect-model experiment with white synthetic noise, so the
filter is told so: no inflation of the model state (there is no model
error), and no representativeness error beyond
the window's own variability (the readings' only error is the white noise
that a window mean averages down).
"""
import numpy as np
import pytest
from filter_twin import CYANO, FIRST_GUESS, T0_D, TRUE_GROWTH_FACTOR, TWIN_SETTINGS, make_twin

from assimilation.augmentation import split
from assimilation.filter_config import FilterConfig
from assimilation.filter_cycle import assimilate, initial_checkpoint
from assimilation.spec import StateLayout

DAYS = 90
SEEDS = (1, 2, 3, 4)
SPIN_UP_DAYS = 20
CONFIG = dict(TWIN_SETTINGS, n_sensors=2, representativeness_fraction=0.0)


def _run(seed, method="sqrt"):
    twin = make_twin(DAYS, seed)
    layout = StateLayout(twin.spec)
    cfg = FilterConfig(method=method, **CONFIG)
    ckpt = initial_checkpoint(twin.spec, cfg, T0_D, np.random.default_rng(seed + 100), initial_state=FIRST_GUESS)
    err, spread, statuses = [], [], []
    mu = [split(ckpt, twin.spec)[1]["mu_max_20_per_d"][:, CYANO].mean()]  # mu[d]: after d days
    for day in range(1, DAYS + 1):
        result = assimilate(ckpt, twin.observations, twin.spec, twin.drivers, cfg, T0_D + day)
        statuses.append(result.status)
        ckpt = result.checkpoint
        states, params, _ = split(ckpt, twin.spec)
        chl = layout.total_chlorophyll(states)  # (M, B)
        truth = layout.total_chlorophyll(twin.truth[day * 24 - 1])
        err.append(chl.mean(axis=0) - truth)
        spread.append(chl.std(axis=0, ddof=1))
        mu.append(params["mu_max_20_per_d"][:, CYANO].mean())
    return twin, np.array(err), np.array(spread), np.array(mu), statuses


@pytest.fixture(scope="module")
def runs():
    return [_run(seed) for seed in SEEDS]


@pytest.mark.slow
def test_twin_chlorophyll_analysis_error_is_well_below_observation_error(runs):
    for twin, err, _, _, statuses in runs:
        assert set(statuses) == {"ok"}
        rmse = np.sqrt(np.mean(err[SPIN_UP_DAYS:] ** 2))
        assert rmse < 0.3 * twin.sensor_error_rms


@pytest.mark.slow
def test_twin_spread_matches_error(runs):
    # A calibrated ensemble has spread ≈ RMSE of its mean (common practice;
    # Fortin et al. 2014, J. Hydrometeor. 15:1708); pooled over the twins.
    err = np.concatenate([r[1][SPIN_UP_DAYS:] for r in runs])
    spread = np.concatenate([r[2][SPIN_UP_DAYS:] for r in runs])
    ratio = np.sqrt(np.mean(spread**2)) / np.sqrt(np.mean(err**2))
    assert 0.7 < ratio < 1.3


@pytest.mark.slow
def test_twin_recovers_growth_rate_of_blooming_group(runs):
    twin = runs[0][0]
    true_mu = twin.spec.groups[CYANO].mu_max_20_per_d * TRUE_GROWTH_FACTOR
    for _, _, _, mu, _ in runs:
        assert abs(mu[0] / true_mu - 1.0) > 0.15  # the prior mean starts outside the bar
        assert abs(mu[60] / true_mu - 1.0) < 0.15  # after 60 days


@pytest.mark.slow
def test_twin_stochastic_form_also_tracks_the_truth():
    twin, err, spread, mu, statuses = _run(SEEDS[0], method="stochastic")
    assert set(statuses) == {"ok"}
    assert np.sqrt(np.mean(err[SPIN_UP_DAYS:] ** 2)) < 0.3 * twin.sensor_error_rms
