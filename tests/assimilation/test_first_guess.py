"""The default first guess of a cold start: its layout over basins and groups, and its checks."""
from dataclasses import replace

import numpy as np
import pytest
from filter_twin import T0_D, spec

from assimilation.filter_config import FilterConfig
from assimilation.filter_cycle import initial_checkpoint
from assimilation.first_guess import DEFAULT_FIRST_GUESS, FirstGuess
from assimilation.spec import StateLayout


def test_first_guess_fills_every_basin_with_nutrients_and_group_chlorophyll():
    s = spec()  # three basins; groups: green algae, cyanobacteria
    layout = StateLayout(s)
    x = FirstGuess(nitrogen_ugL=310.0, phosphorus_ugL=9.0, other_chlorophyll_ugL=2.5,
                   cyanobacteria_chlorophyll_ugL=0.4).state(s)
    assert x.shape == (layout.n_state,)
    np.testing.assert_array_equal(layout.nitrogen(x), 310.0)
    np.testing.assert_array_equal(layout.phosphorus(x), 9.0)
    np.testing.assert_array_equal(layout.chlorophyll(x)[:, s.cyanobacteria_index], 0.4)
    np.testing.assert_array_equal(layout.chlorophyll(x)[:, 1 - s.cyanobacteria_index], 2.5)


def test_first_guess_without_a_cyanobacteria_group_keeps_the_total_chlorophyll():
    s = spec()
    plain = replace(s, groups=tuple(replace(g, is_cyanobacteria=False) for g in s.groups))
    x = DEFAULT_FIRST_GUESS.state(plain)
    total = DEFAULT_FIRST_GUESS.other_chlorophyll_ugL + DEFAULT_FIRST_GUESS.cyanobacteria_chlorophyll_ugL
    np.testing.assert_allclose(StateLayout(plain).total_chlorophyll(x), total, rtol=1e-15)


def test_first_guess_rejects_a_negative_concentration():
    with pytest.raises(ValueError, match="phosphorus_ugL must be a finite concentration"):
        FirstGuess(phosphorus_ugL=-1.0)


def test_initial_checkpoint_without_a_state_spreads_about_the_default_first_guess():
    s = spec()
    cfg = FilterConfig(members=4000, estimate_parameters=False)
    ckpt = initial_checkpoint(s, cfg, T0_D, np.random.default_rng(11))
    # members are the first guess times exp(0.5 z), z standard normal: the median of log(member) is log(first guess)
    median = np.exp(np.median(np.log(ckpt.ensemble), axis=0))
    np.testing.assert_allclose(median, DEFAULT_FIRST_GUESS.state(s), rtol=0.05)
