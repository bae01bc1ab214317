"""Each basin's sediment phosphorus release as an augmented parameter, learnt from the readings.

State augmentation (Anderson 2001; Evensen 2009, ch. 10) in log space like
the group parameters: the release of a basin is a column of the ensemble,
its prior the spec's value, localized like its basin's state. The twin is
Bloomline's own model with a release in the shallow arm three times the
prior (an identical twin, Evensen 2009, ch. 9), observed by weekly SRP and
total P and daily chlorophyll-a.
"""
import numpy as np
import pytest
from filter_twin import FIRST_GUESS, T0_D, TRUE_INITIAL_STATE, TWIN_SETTINGS, drivers, spec, true_parameters

from assimilation import augmentation, budget, integrate
from assimilation.filter_config import FilterConfig
from assimilation.filter_cycle import assimilate, initial_checkpoint
from assimilation.observe import Observations

KEY = "sediment_phosphorus_release_20_mg_m2_d"
PRIOR = 1.0          # mg P/m²/d at 20 °C in every basin
TRUE_RELEASE = np.array([3.0, 1.0, 1.0])


def test_release_columns_follow_the_group_parameters_when_every_basin_has_a_prior():
    s = spec(sediment_release_mg_m2_d=PRIOR)
    names = augmentation.augmented_names(s, estimate_parameters=True, n_sensors=1)
    n_state = len(names) - 2 * s.n_groups - s.n_basins - 1
    assert names[n_state + 2 * s.n_groups:-1] == (f"{KEY}:reed_arm", f"{KEY}:open_water", f"{KEY}:dam_pool")
    np.testing.assert_array_equal(augmentation.spec_parameters(s)[-3:], PRIOR)
    # a zero release means no internal loading: nothing to estimate in log space
    assert not any(n.startswith(KEY) for n in augmentation.augmented_names(spec(0.0), estimate_parameters=True,
                                                                           n_sensors=0))
    assert not any(n.startswith(KEY) for n in augmentation.augmented_names(s, estimate_parameters=False,
                                                                           n_sensors=0))


def test_split_and_localization_treat_the_release_as_a_basin_quantity():
    s = spec(sediment_release_mg_m2_d=PRIOR)
    cfg = FilterConfig(members=8, n_sensors=0)
    ckpt = initial_checkpoint(s, cfg, T0_D, np.random.default_rng(2), initial_state=FIRST_GUESS)
    states, params, _ = augmentation.split(ckpt, s)
    assert params[KEY].shape == (8, 3)
    assert np.all(params[KEY] > 0)
    cols = augmentation.columns(s, ckpt.names)
    obs = Observations([T0_D + 0.5] * 3, ["srp"] * 3, [0, 1, 2], [-1] * 3, [1.0] * 3, [0.5] * 3)
    rho, _ = augmentation.localization_weights(s, cols, obs, cfg.localization_hops)
    release_rows = rho[cols.parameters][-3:]          # (B, p)
    state_rows = rho[[cols.layout.index_phosphorus(b) for b in range(3)]]
    np.testing.assert_array_equal(release_rows, state_rows)
    np.testing.assert_array_equal(rho[cols.parameters][:-3], 1.0)   # group parameters stay global


def _twin(days, seed):
    s = spec(sediment_release_mg_m2_d=PRIOR)
    drv = drivers(days + 1)
    hours = T0_D + np.arange(1, days * 24 + 1) / 24.0
    truth = integrate.simulate(TRUE_INITIAL_STATE[None], s, drv, T0_D, hours,
                               params=true_parameters(s) | {KEY: TRUE_RELEASE[None]})[:, 0]
    rng = np.random.default_rng(seed)
    from assimilation.spec import StateLayout
    layout = StateLayout(s)
    daily = np.arange(9, hours.size, 24)                    # 10:00 every day
    weekly = daily[::7]
    series = [("chlorophyll_a", daily, layout.total_chlorophyll(truth), 0.1),
              ("srp", weekly, layout.phosphorus(truth), 0.1),
              ("total_phosphorus", weekly, budget.total_phosphorus(truth, s), 0.1)]
    parts = []
    for kind, idx, values, rel in series:
        for b in range(s.n_basins):
            v = values[idx, b]
            sd = rel * v + 0.1
            parts.append((hours[idx], [kind] * idx.size, [b] * idx.size, [-1] * idx.size,
                          v + sd * rng.standard_normal(v.shape), sd))
    obs = Observations(*(np.concatenate([p[i] for p in parts]) for i in range(6)))
    return s, drv, obs


@pytest.mark.slow
def test_filter_learns_the_release_of_the_basin_whose_sediment_releases_more():
    # learning is slow: the state absorbs most of each innovation, and the release shows mainly once
    # the bloom makes SRP limiting (measured when written: 1.4 after 6 weeks, 2.6 after 12 weeks)
    days = 84
    s, drv, obs = _twin(days, seed=4)
    cfg = FilterConfig(members=40, n_sensors=0, **TWIN_SETTINGS)
    ckpt = initial_checkpoint(s, cfg, T0_D, np.random.default_rng(7), initial_state=FIRST_GUESS)
    start = np.log(augmentation.split(ckpt, s)[1][KEY]).mean(axis=0)
    for day in range(1, days + 1):
        result = assimilate(ckpt, obs, s, drv, cfg, T0_D + day)
        assert result.status in ("ok", "no_data")
        ckpt = result.checkpoint
    end = np.log(augmentation.split(ckpt, s)[1][KEY]).mean(axis=0)
    error_start = np.abs(start - np.log(TRUE_RELEASE))
    error_end = np.abs(end - np.log(TRUE_RELEASE))
    assert error_start[0] > 0.8                       # the prior is a factor 3 (log 1.1) off in the arm
    assert error_end[0] < 0.5 * error_start[0]        # and the filter closed more than half of it
    assert end[0] > end[1] and end[0] > end[2]        # the arm stands out against the other basins
