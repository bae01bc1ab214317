"""Whole-day (time-mean) readings and censored (below-detection) readings in the filter cycle."""
import numpy as np
import pytest
from filter_twin import FIRST_GUESS, T0_D, TWIN_SETTINGS, drivers, spec
from scipy.integrate import trapezoid

from assimilation import integrate
from assimilation.augmentation import split
from assimilation.filter_config import FilterConfig
from assimilation.filter_cycle import assimilate, initial_checkpoint
from assimilation.observe import Observations, aggregate_windows
from assimilation.spec import NUTRIENT_SLOTS


@pytest.fixture(scope="module")
def setup():
    s, d = spec(), drivers(5)
    cfg = FilterConfig(members=16, estimate_parameters=False, **TWIN_SETTINGS)
    ckpt = initial_checkpoint(s, cfg, T0_D, np.random.default_rng(3), initial_state=FIRST_GUESS)
    return s, d, cfg, ckpt


def total_chl(states, basin, s):
    stride = NUTRIENT_SLOTS + s.n_groups
    return states[..., basin * stride + NUTRIENT_SLOTS: (basin + 1) * stride].sum(axis=-1)


def chl_obs(value, *, span_d=0.0, censored=False, time_d=T0_D + 1):
    return Observations([time_d], ["chlorophyll_a"], [1], [-1], [value], [0.5], [span_d], [censored])


def test_a_whole_day_reading_is_compared_with_the_members_mean_over_the_day(setup):
    s, d, cfg, ckpt = setup
    states, _, _ = split(ckpt, s)
    hours = T0_D + np.arange(25) / 24
    path = integrate.simulate(states, s, d, T0_D, hours)
    # the members' daily means by the trapezoidal rule of scipy, independent of the filter's own
    day_mean = trapezoid(total_chl(path, 1, s), hours, axis=0) / 1.0
    end_value = total_chl(path[-1], 1, s)
    assert abs(day_mean.mean() - end_value.mean()) > 0.05  # the day's mean and its end differ here
    y = 10.0
    daily = assimilate(ckpt, chl_obs(y, span_d=1.0), s, d, cfg, T0_D + 1).diagnostics
    instant = assimilate(ckpt, chl_obs(y), s, d, cfg, T0_D + 1).diagnostics
    assert daily["innovation_mean"] == pytest.approx(y - day_mean.mean(), rel=1e-6)
    assert instant["innovation_mean"] == pytest.approx(y - end_value.mean(), rel=1e-6)
    assert daily["analysis_times_d"] == [pytest.approx(T0_D + 1)]  # analysed at the end of its day


def test_time_means_and_censored_readings_are_not_aggregated_with_instant_ones():
    obs = Observations([T0_D + 0.25, T0_D + 0.5, T0_D + 1, T0_D + 0.5], ["chlorophyll_a"] * 4, [0] * 4, [-1] * 4,
                       [2.0, 4.0, 6.0, 1.0], [0.2] * 4, [0, 0, 1.0, 0], [False, False, False, True])
    agg = aggregate_windows(obs, 1.0)
    assert len(agg) == 3
    assert agg.value.tolist() == [3.0, 1.0, 6.0]  # the instants' mean, the censored limit, the day's mean
    assert agg.censored.tolist() == [False, True, False]
    assert agg.span_d.tolist() == [0.0, 0.0, 1.0]


def test_a_censored_reading_above_the_prior_is_skipped(setup):
    s, d, cfg, ckpt = setup
    result = assimilate(ckpt, chl_obs(500.0, censored=True), s, d, cfg, T0_D + 1)
    assert result.status == "no_data" and result.diagnostics["n_readings"] == 1


def test_a_censored_reading_below_the_prior_pulls_the_analysis_under_the_limit(setup):
    s, d, cfg, ckpt = setup
    prior = split(assimilate(ckpt, Observations.empty(), s, d, cfg, T0_D + 1).checkpoint, s)[0]
    limit = 0.5 * total_chl(prior, 1, s).mean()
    result = assimilate(ckpt, chl_obs(limit, censored=True), s, d, cfg, T0_D + 1)
    assert result.status == "ok"
    # assimilated as limit/2 with error sd limit/2: the innovation is limit/2 minus the prior mean
    assert result.diagnostics["innovation_mean"] == pytest.approx(limit / 2 - total_chl(prior, 1, s).mean(),
                                                                  rel=1e-6)
    after = total_chl(split(result.checkpoint, s)[0], 1, s).mean()
    assert after < total_chl(prior, 1, s).mean()


def test_a_censored_reading_needs_a_positive_limit():
    with pytest.raises(ValueError, match="detection limit"):
        chl_obs(0.0, censored=True)
