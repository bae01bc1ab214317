"""Observations, their aggregation into windows and the observation operators."""
import numpy as np
import pytest

from assimilation.observe import Observations, aggregate_windows, operator_matrix, predict


def _obs(**kw):
    base = dict(time_d=[0.1], kind=["nitrate"], basin=[0], sensor=[-1], value=[10.0], error_sd=[1.0])
    base.update(kw)
    return Observations(**base)


def test_window_mean_and_error_combine_instrument_and_representativeness():
    t = np.array([10.05, 10.3, 10.55, 10.8, 11.2])
    values = np.array([10.0, 12.0, 11.0, 13.0, 50.0])
    obs = Observations(t, ["chlorophyll_fluorescence"] * 5, [1] * 5, [0] * 5, values, [0.5] * 5)
    agg = aggregate_windows(obs, 1.0, representativeness_fraction=0.1)
    assert len(agg) == 2
    first = values[:4]
    mean = first.mean()
    s2 = first.var(ddof=1)
    # Instrument error averages down as sd/sqrt(n) (common practice); the
    # representativeness part is the larger of 10 % of the mean and the real
    # variability s² − sd² (Janjić et al. 2018).
    expected_sd = np.sqrt(0.25 / 4 + max((0.1 * mean) ** 2, s2 - 0.25))
    assert agg.value[0] == pytest.approx(mean)
    assert agg.error_sd[0] == pytest.approx(expected_sd)
    assert agg.time_d[0] == pytest.approx(t[:4].mean())
    # A single reading keeps its instrument error plus 10 % of its value.
    assert agg.error_sd[1] == pytest.approx(np.sqrt(0.25 + 25.0))


def test_windows_keep_kinds_basins_and_sensors_apart():
    obs = Observations([0.2, 0.3, 0.4, 0.5], ["phycocyanin", "phycocyanin", "srp", "phycocyanin"],
                       [0, 1, 0, 0], [-1, -1, -1, 2], [1.0, 2.0, 3.0, 4.0], [0.1] * 4)
    agg = aggregate_windows(obs, 1.0)
    assert len(agg) == 4
    assert sorted(agg.value.tolist()) == [1.0, 2.0, 3.0, 4.0]


def test_missing_values_are_rejected_not_imputed():
    with pytest.raises(ValueError, match="must be finite"):
        _obs(value=[np.nan])


def test_unknown_kind_is_rejected():
    with pytest.raises(ValueError, match="unknown observation kind"):
        _obs(kind=["microcystin"])


def test_error_sd_must_be_positive():
    with pytest.raises(ValueError, match="error_sd must be > 0"):
        _obs(error_sd=[0.0])


def test_empty_observations_aggregate_to_empty():
    assert len(aggregate_windows(Observations.empty())) == 0


def test_operators_see_what_each_instrument_measures():
    # Two basins, two groups (green algae, cyanobacteria); state per basin
    # [N, P, A_green, A_cyano] (DEVELOPERS.md layout). The fluorescence
    # sensor sees gain × total chlorophyll, phycocyanin the cyanobacteria
    # (DESIGN.md, observation operators).
    state = np.array([[100.0, 8.0, 3.0, 5.0, 50.0, 4.0, 1.0, 2.0],
                      [120.0, 9.0, 2.0, 6.0, 60.0, 5.0, 1.5, 2.5]])
    gains = np.array([[1.2], [0.8]])
    obs = Observations(np.zeros(5), ["chlorophyll_fluorescence", "phycocyanin", "chlorophyll_a", "nitrate", "srp"],
                       [0, 1, 1, 1, 0], [0, -1, -1, -1, -1], np.ones(5), np.ones(5))
    H = operator_matrix(obs, 2, 2, [False, True])
    HE = predict(state, gains, obs, H)
    expected = np.array([[1.2 * 8.0, 2.0, 3.0, 50.0, 8.0],
                         [0.8 * 8.0, 2.5, 4.0, 60.0, 9.0]])
    np.testing.assert_allclose(HE, expected)


def test_operator_rejects_basin_outside_the_model():
    with pytest.raises(ValueError, match="basin index out of range"):
        operator_matrix(_obs(basin=[3]), 2, 2, [False, True])
