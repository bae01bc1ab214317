"""Spec, drivers and state layout: shapes, indices and the messages of bad input."""
from dataclasses import replace

import numpy as np
import pytest
from model_scenarios import JUNE_FIRST_2026, initial_ensemble, member_params, summer_drivers, three_basin_spec

from assimilation import budget, integrate, model
from assimilation.forcing import forcing_at
from assimilation.parameters import default_groups, default_spec
from assimilation.spec import Basin, Drivers, Network, StateLayout


def test_state_layout_is_basin_major_with_nutrient_pools_then_groups():
    # layout documented in DEVELOPERS.md: [N_0, P_0, DN_0, DP_0, A_0,0 … A_0,G-1, N_1, …]
    spec = three_basin_spec()
    layout = StateLayout(spec)
    assert layout.n_state == 3 * (4 + 2)
    assert [layout.index_nitrogen(1), layout.index_phosphorus(1), layout.index_detrital_nitrogen(1),
            layout.index_detrital_phosphorus(1), layout.index_chlorophyll(1, 1)] == [6, 7, 8, 9, 11]
    assert layout.names()[:6] == ["north_arm:nitrogen", "north_arm:phosphorus", "north_arm:detrital_nitrogen",
                                  "north_arm:detrital_phosphorus", "north_arm:chl:green_algae",
                                  "north_arm:chl:cyanobacteria"]
    E = np.arange(2 * layout.n_state, dtype=float).reshape(2, -1)
    np.testing.assert_array_equal(layout.nitrogen(E), E[:, [0, 6, 12]])
    np.testing.assert_array_equal(layout.phosphorus(E), E[:, [1, 7, 13]])
    np.testing.assert_array_equal(layout.detrital_nitrogen(E), E[:, [2, 8, 14]])
    np.testing.assert_array_equal(layout.detrital_phosphorus(E), E[:, [3, 9, 15]])
    assert layout.chlorophyll(E).shape == (2, 3, 2)
    assert layout.chlorophyll(E)[1, 2, 1] == E[1, layout.index_chlorophyll(2, 1)]
    np.testing.assert_array_equal(layout.pack(layout.nitrogen(E), layout.phosphorus(E), layout.chlorophyll(E),
                                              layout.detrital_nitrogen(E), layout.detrital_phosphorus(E)), E)


def test_pack_without_detritus_leaves_the_detrital_pools_empty():
    layout = StateLayout(three_basin_spec())
    E = layout.pack(np.full((2, 3), 100.0), np.full((2, 3), 10.0), np.ones((2, 3, 2)))
    assert E.shape == (2, layout.n_state)
    np.testing.assert_array_equal(layout.detrital_nitrogen(E), 0.0)
    np.testing.assert_array_equal(layout.detrital_phosphorus(E), 0.0)
    np.testing.assert_array_equal(layout.nitrogen(E), 100.0)


def test_basin_sediment_release_overrides_the_water_body_value():
    spec = three_basin_spec(sediment_phosphorus_release_20_mg_m2_d=2.0)
    spec = replace(spec, basins=(spec.basins[0], replace(spec.basins[1], sediment_phosphorus_release_20_mg_m2_d=0.0),
                                 spec.basins[2]))
    np.testing.assert_array_equal(spec.sediment_release_by_basin(), [2.0, 0.0, 2.0])
    with pytest.raises(ValueError, match=r"Basin 'north_arm': sediment_phosphorus_release_20_mg_m2_d must be a "
                                         r"non-negative number or None, got -1\.0"):
        replace(spec.basins[0], sediment_phosphorus_release_20_mg_m2_d=-1.0)
    with pytest.raises(ValueError, match=r"detrital_fraction must be in \[0, 1\], got 1\.5"):
        replace(spec, detrital_fraction=1.5)


def test_layout_accessors_keep_leading_axes_of_saved_trajectories():
    layout = StateLayout(three_basin_spec())
    X = np.zeros((5, 7, layout.n_state))
    assert layout.chlorophyll(X).shape == (5, 7, 3, 2)
    assert layout.total_chlorophyll(X).shape == (5, 7, 3)


def test_default_groups_include_a_cyanobacteria_group_and_another():
    groups = default_groups()
    assert sum(g.is_cyanobacteria for g in groups) == 1
    assert len(groups) >= 2
    cyano = next(g for g in groups if g.is_cyanobacteria)
    assert cyano.settling_m_per_d == 0.0


def test_network_rejects_a_loop():
    with pytest.raises(ValueError, match="loop through basin 0"):
        Network(downstream=(1, 0), inflow_basin=(0,))


def test_network_rejects_an_unknown_basin_index():
    with pytest.raises(ValueError, match=r"inflow_basin\[0\] must be a basin index in 0..1"):
        Network(downstream=(1, -1), inflow_basin=(2,))


def test_spec_rejects_network_of_another_size():
    basins = three_basin_spec().basins
    with pytest.raises(ValueError, match="2 entries but the spec has 3 basins"):
        default_spec(basins, Network(downstream=(1, -1)))


def test_basin_rejects_non_positive_volume():
    with pytest.raises(ValueError, match="volume_m3 must be a positive number"):
        Basin("bad_basin", volume_m3=0.0, mean_depth_m=2.0, area_m2=1.0)


def test_drivers_reject_non_increasing_time():
    d = summer_drivers(days=1)
    with pytest.raises(ValueError, match="strictly increasing"):
        Drivers(d.time_d[::-1], d.water_temperature_C, d.shortwave_W_m2, d.inflow_m3_s,
                d.inflow_nitrogen_ugL, d.inflow_phosphorus_ugL)


def test_drivers_reject_missing_values():
    d = summer_drivers(days=1)
    temperature = d.water_temperature_C.copy()
    temperature[3, 1] = np.nan
    with pytest.raises(ValueError, match="water_temperature_C must be finite"):
        Drivers(d.time_d, temperature, d.shortwave_W_m2, d.inflow_m3_s, d.inflow_nitrogen_ugL,
                d.inflow_phosphorus_ugL)


def test_advance_rejects_a_span_the_drivers_do_not_cover():
    spec = three_basin_spec()
    with pytest.raises(ValueError, match="drivers cover epoch days"):
        integrate.advance(initial_ensemble(spec, 2), spec, summer_drivers(days=2), JUNE_FIRST_2026,
                          JUNE_FIRST_2026 + 3.0)


def test_advance_rejects_negative_concentrations():
    spec = three_basin_spec()
    E = initial_ensemble(spec, 2)
    E[1, 3] = -0.5
    with pytest.raises(ValueError, match="negative concentrations"):
        integrate.advance(E, spec, summer_drivers(days=2), JUNE_FIRST_2026, JUNE_FIRST_2026 + 1.0)


def test_advance_rejects_unknown_or_misshapen_parameters():
    spec = three_basin_spec()
    E = initial_ensemble(spec, 2)
    drivers = summer_drivers(days=2)
    with pytest.raises(ValueError, match="unknown model parameter"):
        integrate.advance(E, spec, drivers, JUNE_FIRST_2026, JUNE_FIRST_2026 + 1.0,
                          params={"k_n_ugL": np.ones((2, 2))})
    with pytest.raises(ValueError, match="has 3 members, the ensemble has 2"):
        integrate.advance(E, spec, drivers, JUNE_FIRST_2026, JUNE_FIRST_2026 + 1.0,
                          params={"mu_max_20_per_d": np.ones((3, 2))})


def test_per_member_growth_rate_changes_only_that_member():
    spec = three_basin_spec()
    E = np.repeat(initial_ensemble(spec, 1), 2, axis=0)
    drivers = summer_drivers(days=5)
    mu = np.array([[g.mu_max_20_per_d for g in spec.groups]] * 2)
    mu[1, 1] *= 1.5
    X = integrate.advance(E, spec, drivers, JUNE_FIRST_2026, JUNE_FIRST_2026 + 5.0, params={"mu_max_20_per_d": mu})
    same = integrate.advance(E[:1], spec, drivers, JUNE_FIRST_2026, JUNE_FIRST_2026 + 5.0)
    np.testing.assert_allclose(X[0], same[0], rtol=1e-12)
    layout = StateLayout(spec)
    assert np.all(layout.chlorophyll(X)[1, :, 1] > layout.chlorophyll(X)[0, :, 1])


def test_inflow_chlorophyll_is_carried_into_the_basin():
    spec = three_basin_spec()
    d = summer_drivers(days=3)
    chl_in = np.zeros(d.inflow_m3_s.shape + (2,))
    chl_in[:, 0, 1] = 50.0
    with_chl = replace(d, inflow_chlorophyll_ugL=chl_in)
    E = initial_ensemble(spec, 1)
    a = integrate.advance(E, spec, d, JUNE_FIRST_2026, JUNE_FIRST_2026 + 3.0)
    b = integrate.advance(E, spec, with_chl, JUNE_FIRST_2026, JUNE_FIRST_2026 + 3.0)
    layout = StateLayout(spec)
    assert layout.chlorophyll(b)[0, 0, 1] > layout.chlorophyll(a)[0, 0, 1]


def test_total_phosphorus_adds_algal_phosphorus_by_stoichiometry():
    spec = three_basin_spec()
    layout = StateLayout(spec)
    E = layout.pack(np.full((1, 3), 100.0), np.full((1, 3), 10.0), np.full((1, 3, 2), 5.0))
    np.testing.assert_allclose(budget.total_phosphorus(E, spec), 10.0 + 10.0 * spec.phosphorus_to_chlorophyll)
    # Redfield by mass 41:7.2:1 (Redfield 1958) with carbon:chlorophyll 50 → 8.78 µg N and 1.22 µg P per µg chl-a
    assert spec.nitrogen_to_chlorophyll == pytest.approx(50 * 7.2 / 41)
    assert spec.phosphorus_to_chlorophyll == pytest.approx(50 / 41)


def test_advance_rejects_a_non_positive_step():
    spec = three_basin_spec()
    with pytest.raises(ValueError, match="dt_d must be a positive number of days"):
        integrate.advance(initial_ensemble(spec, 2), spec, summer_drivers(days=2), JUNE_FIRST_2026,
                          JUNE_FIRST_2026 + 1.0, dt_d=0.0)


def scenario_drivers(base, offsets_C, members_per_scenario):
    """(T, M, B) water temperature: each offset [°C] for a block of members (weather scenarios)."""
    per_member = np.repeat(np.asarray(offsets_C, dtype=float), members_per_scenario)
    temperature = base.water_temperature_C[:, None, :] + per_member[None, :, None]
    return replace(base, water_temperature_C=temperature)


def test_one_call_with_member_temperatures_equals_one_call_per_scenario():
    # three air-temperature scenarios, two members each, with sediment release (temperature-driven) on
    spec = three_basin_spec(sediment_phosphorus_release_20_mg_m2_d=1.0)
    base = summer_drivers(days=6)
    offsets, k = (0.0, 3.0, -3.0), 2
    E = initial_ensemble(spec, len(offsets) * k)
    params = member_params(spec, len(offsets) * k)
    save = JUNE_FIRST_2026 + np.arange(0.0, 6.0 + 1e-9, 1.0)
    together = integrate.simulate(E, spec, scenario_drivers(base, offsets, k), save[0], save, params=params)
    for s, offset in enumerate(offsets):
        rows = slice(s * k, (s + 1) * k)
        shifted = replace(base, water_temperature_C=base.water_temperature_C + offset)
        alone = integrate.simulate(E[rows], spec, shifted, save[0], save,
                                   params={key: v[rows] for key, v in params.items()})
        np.testing.assert_allclose(together[:, rows], alone, rtol=1e-12, atol=1e-12)
    # the scenarios really differ from the unshifted run, so the check is not trivial
    plain = integrate.simulate(E, spec, base, save[0], save, params=params)
    np.testing.assert_allclose(together[:, :k], plain[:, :k], rtol=1e-12, atol=1e-12)
    assert np.abs(together[-1, k:] - plain[-1, k:]).max(axis=-1).min() > 0.1
    cyano = StateLayout(spec).chlorophyll(together[-1])[..., 1] / StateLayout(spec).chlorophyll(plain[-1])[..., 1]
    assert np.all(cyano[k:2 * k] > 1.0) and np.all(cyano[2 * k:] < 1.0)      # warmer water, faster cyanobacteria


def test_member_temperatures_keep_the_mass_budget_identity():
    # d/dt total mass from the tendency equals mass_fluxes' net, member by member, with (T, M, B) temperatures
    spec = three_basin_spec(sediment_phosphorus_release_20_mg_m2_d=1.5)
    drivers = scenario_drivers(summer_drivers(days=3), (0.0, 4.0, -4.0), 2)
    rng = np.random.default_rng(5)
    layout = StateLayout(spec)
    E = rng.uniform(0.1, 200.0, (6, layout.n_state))
    forcing = forcing_at(drivers, spec, [JUNE_FIRST_2026 + 1.5])
    assert forcing.water_temperature_C.shape == (1, 6, 3)
    dE = model.tendency(E, spec, forcing)
    volume = np.array([b.volume_m3 for b in spec.basins])
    dn = ((layout.nitrogen(dE) + layout.detrital_nitrogen(dE)
           + spec.nitrogen_to_chlorophyll * layout.total_chlorophyll(dE)) * volume).sum(-1)
    dp = ((layout.phosphorus(dE) + layout.detrital_phosphorus(dE)
           + spec.phosphorus_to_chlorophyll * layout.total_chlorophyll(dE)) * volume).sum(-1)
    net = budget.mass_fluxes(E, spec, forcing)["net"]
    np.testing.assert_allclose(np.stack([dn, dp], -1) * 1e-6, net, rtol=1e-10, atol=1e-12 * np.abs(net).max())
    # warmer members release more sediment phosphorus
    release = budget.mass_fluxes(E, spec, forcing)["sediment_release"][:, 1]
    assert release[2] > release[0] > release[4]


def test_advance_rejects_member_temperatures_for_another_ensemble_size():
    spec = three_basin_spec()
    drivers = scenario_drivers(summer_drivers(days=2), (0.0, 2.0), 2)         # 4 members
    with pytest.raises(ValueError, match="one series for each of 4 members .* ensemble has 3 members"):
        integrate.advance(initial_ensemble(spec, 3), spec, drivers, JUNE_FIRST_2026, JUNE_FIRST_2026 + 1.0)
    with pytest.raises(ValueError, match="one series for each of 4 members .* ensemble has 3 members"):
        model.tendency(initial_ensemble(spec, 3), spec, forcing_at(drivers, spec, [JUNE_FIRST_2026]))


def test_drivers_reject_water_temperature_of_four_dimensions():
    d = summer_drivers(days=1)
    with pytest.raises(ValueError, match=r"water_temperature_C must have shape \(T=25, B\) or \(T=25, M, B\)"):
        replace(d, water_temperature_C=d.water_temperature_C[:, None, None, :])
