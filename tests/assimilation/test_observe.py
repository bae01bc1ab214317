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
    # [N, P, DN, DP, A_green, A_cyano] (DEVELOPERS.md layout). The fluorescence
    # sensor sees gain × total chlorophyll, phycocyanin the cyanobacteria
    # (DESIGN.md, observation operators); total P and total N the sum of the
    # pools, algal N and P by the stoichiometry passed in.
    state = np.array([[100.0, 8.0, 30.0, 4.0, 3.0, 5.0, 50.0, 4.0, 20.0, 2.0, 1.0, 2.0],
                      [120.0, 9.0, 35.0, 4.5, 2.0, 6.0, 60.0, 5.0, 25.0, 2.5, 1.5, 2.5]])
    gains = np.array([[1.2], [0.8]])
    kinds = ["chlorophyll_fluorescence", "phycocyanin", "chlorophyll_a", "nitrate", "srp", "total_phosphorus",
             "total_nitrogen"]
    obs = Observations(np.zeros(7), kinds, [0, 1, 1, 1, 0, 0, 1], [0, -1, -1, -1, -1, -1, -1], np.ones(7),
                       np.ones(7))
    H = operator_matrix(obs, 2, 2, [False, True], nitrogen_to_chlorophyll=9.0, phosphorus_to_chlorophyll=1.5)
    HE = predict(state, gains, obs, H)
    expected = np.array([[1.2 * 8.0, 2.0, 3.0, 50.0, 8.0, 8.0 + 4.0 + 1.5 * 8.0, 50.0 + 20.0 + 9.0 * 3.0],
                         [0.8 * 8.0, 2.5, 4.0, 60.0, 9.0, 9.0 + 4.5 + 1.5 * 8.0, 60.0 + 25.0 + 9.0 * 4.0]])
    np.testing.assert_allclose(HE, expected)


def test_total_phosphorus_operator_agrees_with_the_budget_and_defaults_to_the_default_stoichiometry():
    from assimilation.budget import total_nitrogen, total_phosphorus
    from assimilation.parameters import default_spec
    from assimilation.spec import Basin, Network, StateLayout

    spec = default_spec((Basin("a", 1e6, 2.0, 5e5), Basin("b", 1e6, 3.0, 3e5)), Network((1, -1)))
    E = np.random.default_rng(3).uniform(0.5, 80.0, (4, StateLayout(spec).n_state))
    obs = Observations(np.zeros(4), ["total_phosphorus", "total_phosphorus", "total_nitrogen", "total_nitrogen"],
                       [0, 1, 0, 1], [-1] * 4, np.ones(4), np.ones(4))
    HE = predict(E, np.ones((4, 0)), obs, operator_matrix(obs, 2, 2, [False, True]))
    np.testing.assert_allclose(HE[:, :2], total_phosphorus(E, spec), rtol=1e-14)
    np.testing.assert_allclose(HE[:, 2:], total_nitrogen(E, spec), rtol=1e-14)


def test_operator_rejects_basin_outside_the_model():
    with pytest.raises(ValueError, match="basin index out of range"):
        operator_matrix(_obs(basin=[3]), 2, 2, [False, True])
