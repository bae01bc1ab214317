"""Mass bookkeeping: closed networks conserve N and P; open ones balance their loads."""
from dataclasses import replace

import numpy as np
import pytest

from assimilation import integrate, model
from assimilation.parameters import default_spec
from assimilation.spec import Basin, Drivers, Network, StateLayout
from model_scenarios import JUNE_FIRST_2026, initial_ensemble, member_params, summer_drivers, three_basin_spec


def closed_drivers(days=30, n_basins=3):
    base = summer_drivers(days=days, n_basins=n_basins)
    T = base.time_d.size
    empty = np.zeros((T, 0))
    return Drivers(base.time_d, base.water_temperature_C, base.shortwave_W_m2, empty, empty, empty)


def closed_spec(**overrides):
    basins = three_basin_spec().basins
    spec = default_spec(basins, Network(downstream=(1, 2, -1), inflow_basin=()))
    return replace(spec, **overrides)


def test_closed_network_without_sinks_conserves_total_nitrogen_and_phosphorus_to_round_off():
    # no inflow, full recycling, no settling, no denitrification, no sediment release:
    # total N and P are invariants (common practice)
    spec = closed_spec(recycled_fraction=1.0, denitrification_20_per_d=0.0)
    spec = replace(spec, groups=tuple(replace(g, settling_m_per_d=0.0) for g in spec.groups))
    drivers = closed_drivers()
    E = initial_ensemble(spec, 20)
    X = integrate.simulate(E, spec, drivers, JUNE_FIRST_2026, JUNE_FIRST_2026 + np.arange(0, 31.0),
                           params=member_params(spec, 20))
    mass = model.total_mass(X, spec)                           # (S, M, 2)
    np.testing.assert_allclose(mass, np.broadcast_to(mass[0], mass.shape), rtol=1e-12, atol=0)
    # and the state did change a lot, so conservation is not trivial
    assert np.max(np.abs(X[-1] - X[0])) > 10.0


def test_conservation_holds_for_huge_steps_and_stiff_growth():
    # positivity and conservation are unconditional (Burchard et al. 2003): 12-hour steps, growth 20 /d
    spec = closed_spec(recycled_fraction=1.0, denitrification_20_per_d=0.0)
    spec = replace(spec, groups=tuple(replace(g, settling_m_per_d=0.0, mu_max_20_per_d=20.0) for g in spec.groups))
    drivers = closed_drivers()
    E = initial_ensemble(spec, 10)
    X = integrate.simulate(E, spec, drivers, JUNE_FIRST_2026, JUNE_FIRST_2026 + np.arange(0, 31.0), dt_d=0.5)
    assert np.all(X >= 0)
    mass = model.total_mass(X, spec)
    np.testing.assert_allclose(mass, np.broadcast_to(mass[0], mass.shape), rtol=1e-12, atol=0)


def test_closed_network_loses_exactly_what_settles_is_not_recycled_or_denitrified():
    spec = closed_spec()
    drivers = closed_drivers(days=20)
    E = initial_ensemble(spec, 4)
    times = JUNE_FIRST_2026 + np.arange(0, 20 + 1e-9, 1 / 24)
    X = integrate.simulate(E, spec, drivers, JUNE_FIRST_2026, times, dt_d=1 / 24)
    sinks = np.array([_fluxes(X[k], spec, drivers, t) for k, t in enumerate(times)])  # (S, M, 2) kg/d
    expected = -np.trapezoid(sinks, times, axis=0)
    change = model.total_mass(X[-1], spec) - model.total_mass(X[0], spec)
    assert np.all(change < 0)
    np.testing.assert_allclose(change, expected, rtol=5e-5)


def _fluxes(E, spec, drivers, t):
    f = model.mass_fluxes(E, spec, model.forcing_at(drivers, spec, [t]))
    return (f["settling"] + f["mortality_loss"] + f["denitrification"] - f["sediment_release"]
            - f["inflow"] + f["outflow"])


def test_open_network_change_in_mass_equals_inflow_minus_outflow_minus_losses():
    spec = three_basin_spec(sediment_phosphorus_release_20_mg_m2_d=2.0)
    drivers = summer_drivers(days=30)
    E = initial_ensemble(spec, 4)
    times = JUNE_FIRST_2026 + np.arange(0, 30 + 1e-9, 1 / 24)
    X = integrate.simulate(E, spec, drivers, JUNE_FIRST_2026, times)
    net_loss = np.array([_fluxes(X[k], spec, drivers, t) for k, t in enumerate(times)])
    change = model.total_mass(X[-1], spec) - model.total_mass(X[0], spec)
    expected = -np.trapezoid(net_loss, times, axis=0)
    # compare against the throughput (the inflow load), which dwarfs round-off and time-quadrature error
    inflow = np.trapezoid([model.mass_fluxes(X[k], spec, model.forcing_at(drivers, spec, [t]))["inflow"]
                           for k, t in enumerate(times)], times, axis=0)
    assert np.max(np.abs(change - expected) / inflow) < 2e-4


def test_mass_fluxes_net_equals_rate_of_change_of_total_mass_from_the_tendency():
    # bookkeeping identity: d/dt Σ V·(N + a_N ΣA) equals inflow − outflow − settling − loss − denitrification
    # (+ release for P)
    spec = three_basin_spec(sediment_phosphorus_release_20_mg_m2_d=1.5)
    drivers = summer_drivers(days=3)
    rng = np.random.default_rng(5)
    layout = StateLayout(spec)
    E = rng.uniform(0.1, 200.0, (6, layout.n_state))
    params = member_params(spec, 6)
    forcing = model.forcing_at(drivers, spec, [JUNE_FIRST_2026 + 1.5])
    dE = model.tendency(E, spec, forcing, params)
    volume = np.array([b.volume_m3 for b in spec.basins])
    dn = ((layout.nitrogen(dE) + spec.nitrogen_to_chlorophyll * layout.total_chlorophyll(dE)) * volume).sum(-1)
    dp = ((layout.phosphorus(dE) + spec.phosphorus_to_chlorophyll * layout.total_chlorophyll(dE)) * volume).sum(-1)
    rate = np.stack([dn, dp], -1) * 1e-6
    net = model.mass_fluxes(E, spec, forcing, params)["net"]
    np.testing.assert_allclose(rate, net, rtol=1e-10, atol=1e-12 * np.abs(net).max())


def test_integrator_keeps_concentrations_non_negative_through_a_flood():
    # a flood flushing the small arm 50 times a day with nutrient-free water, 6-hour steps
    spec = three_basin_spec()
    base = summer_drivers(days=10)
    flood = base.inflow_m3_s.copy()
    flood[:, 0] = 50.0 * spec.basins[0].volume_m3 / 86400.0
    drivers = Drivers(base.time_d, base.water_temperature_C, base.shortwave_W_m2, flood,
                      np.zeros_like(flood), np.zeros_like(flood))
    X = integrate.simulate(initial_ensemble(spec, 5), spec, drivers, JUNE_FIRST_2026,
                           JUNE_FIRST_2026 + np.arange(0, 10.0), dt_d=0.25)
    assert np.all(X >= 0)
    assert StateLayout(spec).nitrogen(X[-1])[:, 0].max() < 1e-3
