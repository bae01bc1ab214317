"""Mass bookkeeping: closed networks conserve N and P; open ones balance their loads.

Total N and P count DIN/SRP, detrital N/P and algal N/P. Detritus formation
and remineralisation move nutrient within the total; nitrogen fixation and
sediment release are sources; settling of algae and detritus, mortality lost
at once, denitrification and outflow are sinks.
"""
from dataclasses import replace

import numpy as np
from model_scenarios import JUNE_FIRST_2026, initial_ensemble, member_params, summer_drivers, three_basin_spec

from assimilation import budget, integrate, model
from assimilation.forcing import forcing_at
from assimilation.parameters import default_spec
from assimilation.spec import Drivers, Network, StateLayout


def closed_drivers(days=30, n_basins=3):
    base = summer_drivers(days=days, n_basins=n_basins)
    T = base.time_d.size
    empty = np.zeros((T, 0))
    return Drivers(base.time_d, base.water_temperature_C, base.shortwave_W_m2, empty, empty, empty)


def closed_spec(**overrides):
    """The three basins without inflows and, unless overridden, without sediment release."""
    basins = three_basin_spec().basins
    spec = default_spec(basins, Network(downstream=(1, 2, -1), inflow_basin=()))
    return replace(spec, **({"sediment_phosphorus_release_20_mg_m2_d": 0.0} | overrides))


def without_sinks(spec):
    """No settling of algae or detritus, no denitrification, no fixation, no release, and all of the
    non-recycled mortality becomes detritus: total N and P are invariants (common practice)."""
    spec = without_fixation(replace(spec, denitrification_20_per_d=0.0, detritus_settling_m_per_d=0.0,
                                    detrital_fraction=1.0, sediment_phosphorus_release_20_mg_m2_d=0.0))
    return replace(spec, groups=tuple(replace(g, settling_m_per_d=0.0) for g in spec.groups))


def with_detritus(E, spec, nitrogen_ugL=40.0, phosphorus_ugL=5.0):
    """E with detrital N and P [µg/L] in every basin."""
    layout = StateLayout(spec)
    return layout.pack(layout.nitrogen(E), layout.phosphorus(E), layout.chlorophyll(E),
                       nitrogen_ugL, phosphorus_ugL)


def without_fixation(spec):
    return replace(spec, groups=tuple(replace(g, nitrogen_fixing=False) for g in spec.groups))


def test_closed_network_without_sinks_conserves_total_nitrogen_and_phosphorus_to_round_off():
    # half of mortality recycled at once, the other half through the detrital pools, which
    # remineralise: total N and P (dissolved + detrital + algal) are invariants
    spec = without_sinks(closed_spec())
    assert spec.recycled_fraction == 0.5
    drivers = closed_drivers()
    E = with_detritus(initial_ensemble(spec, 20), spec)
    X = integrate.simulate(E, spec, drivers, JUNE_FIRST_2026, JUNE_FIRST_2026 + np.arange(0, 31.0),
                           params=member_params(spec, 20))
    mass = budget.total_mass(X, spec)                           # (S, M, 2)
    np.testing.assert_allclose(mass, np.broadcast_to(mass[0], mass.shape), rtol=1e-12, atol=0)
    # and the state did change a lot, detritus included, so conservation is not trivial
    assert np.max(np.abs(X[-1] - X[0])) > 10.0
    layout = StateLayout(spec)
    assert np.max(np.abs(layout.detrital_phosphorus(X[-1]) - layout.detrital_phosphorus(X[0]))) > 1.0


def test_conservation_holds_for_huge_steps_and_stiff_growth():
    # positivity and conservation are unconditional (Burchard et al. 2003): 12-hour steps, growth 20 /d,
    # remineralisation 5 /d (a detrital pool turning over in hours)
    spec = without_sinks(closed_spec(nitrogen_remineralisation_20_per_d=5.0,
                                     phosphorus_remineralisation_20_per_d=5.0))
    spec = replace(spec, groups=tuple(replace(g, mu_max_20_per_d=20.0) for g in spec.groups))
    drivers = closed_drivers()
    E = with_detritus(initial_ensemble(spec, 10), spec)
    X = integrate.simulate(E, spec, drivers, JUNE_FIRST_2026, JUNE_FIRST_2026 + np.arange(0, 31.0), dt_d=0.5)
    assert np.all(X >= 0)
    mass = budget.total_mass(X, spec)
    np.testing.assert_allclose(mass, np.broadcast_to(mass[0], mass.shape), rtol=1e-12, atol=0)


def test_closed_network_with_detritus_keeps_what_the_old_model_lost_at_once():
    # the same closed, sink-free run with detrital_fraction 0 loses exactly the non-recycled mortality
    # (the model before the detrital pools); with the pools that nutrient stays and remineralises
    spec = without_sinks(closed_spec())
    leaky = replace(spec, detrital_fraction=0.0)
    drivers = closed_drivers(days=10)
    E = initial_ensemble(spec, 4)
    times = JUNE_FIRST_2026 + np.arange(0, 10.0)
    kept = budget.total_mass(integrate.simulate(E, spec, drivers, times[0], times), spec)
    lost = budget.total_mass(integrate.simulate(E, leaky, drivers, times[0], times), leaky)
    np.testing.assert_allclose(kept, np.broadcast_to(kept[0], kept.shape), rtol=1e-12, atol=0)
    assert np.all(lost[-1] < 0.97 * lost[0])


def test_closed_network_loses_exactly_what_settles_is_not_recycled_or_denitrified():
    # algae and detritus settle, denitrification, part of mortality lost at once (detrital_fraction 0.6)
    spec = without_fixation(closed_spec(detrital_fraction=0.6))
    drivers = closed_drivers(days=20)
    E = with_detritus(initial_ensemble(spec, 4), spec)
    times = JUNE_FIRST_2026 + np.arange(0, 20 + 1e-9, 1 / 24)
    X = integrate.simulate(E, spec, drivers, JUNE_FIRST_2026, times, dt_d=1 / 24)
    fluxes = [budget.mass_fluxes(X[k], spec, forcing_at(drivers, spec, [t])) for k, t in enumerate(times)]
    sinks = np.array([_sinks(f) for f in fluxes])                                        # (S, M, 2) kg/d
    expected = -np.trapezoid(sinks, times, axis=0)
    change = budget.total_mass(X[-1], spec) - budget.total_mass(X[0], spec)
    assert np.all(change < 0)
    np.testing.assert_allclose(change, expected, rtol=5e-5)
    # every sink is at work, detritus settling and mortality lost at once among them
    for key in ("settling", "detritus_settling", "mortality_loss"):
        assert np.all(np.trapezoid([f[key] for f in fluxes], times, axis=0) > 1e-3 * np.abs(change))


def test_sediment_release_is_the_only_phosphorus_source_of_a_closed_network():
    # closed, no other P sink: total P grows by the time integral of the basins' release
    # J_20·theta^(T−20)·area (Arrhenius form, kinetics.sediment_phosphorus_release), per member
    spec = without_sinks(closed_spec())
    spec = replace(spec, basins=(replace(spec.basins[0], sediment_phosphorus_release_20_mg_m2_d=4.0),)
                   + spec.basins[1:], sediment_phosphorus_release_20_mg_m2_d=0.5)
    drivers = closed_drivers(days=10)
    E = with_detritus(initial_ensemble(spec, 3), spec)
    release = np.array([[1.0, 0.5, 0.5], [4.0, 0.5, 0.5], [8.0, 2.0, 0.0]])          # (M, B) mg P/m²/d
    times = JUNE_FIRST_2026 + np.arange(0, 10 + 1e-9, 1 / 24)
    params = {"sediment_phosphorus_release_20_mg_m2_d": release}
    X = integrate.simulate(E, spec, drivers, JUNE_FIRST_2026, times, params=params)
    change = budget.total_mass(X[-1], spec) - budget.total_mass(X[0], spec)
    area = np.array([b.volume_m3 / b.mean_depth_m for b in spec.basins])               # m², the exchange area
    theta = spec.theta_sediment_release ** (drivers.water_temperature_C - 20.0)         # (T, B) on the driver grid
    on_grid = (drivers.time_d >= times[0]) & (drivers.time_d <= times[-1])
    mg_per_day = (release[None] * theta[on_grid, None, :] * area).sum(axis=-1)          # (T, M)
    expected = np.trapezoid(mg_per_day, drivers.time_d[on_grid], axis=0) * budget.KG_PER_MG
    np.testing.assert_allclose(change[:, 1], expected, rtol=1e-5)
    np.testing.assert_allclose(change[:, 0], 0.0, atol=1e-12 * budget.total_mass(X[0], spec)[:, 0].max())
    # the spec's per-basin values are what the model uses without params
    np.testing.assert_array_equal(spec.sediment_release_by_basin(), [4.0, 0.5, 0.5])


def _sinks(f):
    """Net loss [kg/d] from the terms of a mass_fluxes dict, summed here on their own."""
    return (f["settling"] + f["detritus_settling"] + f["mortality_loss"] + f["denitrification"] - f["fixation"]
            - f["sediment_release"] - f["inflow"] + f["outflow"])


def _fluxes(E, spec, drivers, t):
    return _sinks(budget.mass_fluxes(E, spec, forcing_at(drivers, spec, [t])))


def nitrogen_poor_closed_case(days):
    """Closed network, full recycling, no settling: DIN runs out, fixers keep growing."""
    spec = closed_spec(recycled_fraction=1.0, detritus_settling_m_per_d=0.0)
    spec = replace(spec, groups=tuple(replace(g, settling_m_per_d=0.0) for g in spec.groups))
    E = initial_ensemble(spec, 4)
    layout = StateLayout(spec)
    E = layout.pack(0.1 * layout.nitrogen(E), 5.0 * layout.phosphorus(E), layout.chlorophyll(E))
    return spec, closed_drivers(days=days), E


def test_closed_network_nitrogen_changes_by_fixation_minus_denitrification():
    # closed, fully recycling, no settling: d(total N)/dt = fixation − denitrification, total P constant.
    # DIN turns over within an hour here, so the time quadrature of the fluxes needs short steps: the
    # books agree to 1.7 % at 1 h, 0.7 % at 30 min, 0.19 % at 15 min, 0.05 % at 7.5 min (second order)
    spec, drivers, E = nitrogen_poor_closed_case(20)
    times = JUNE_FIRST_2026 + np.arange(0, 20 + 1e-9, 1 / 96)
    X = integrate.simulate(E, spec, drivers, JUNE_FIRST_2026, times, dt_d=1 / 96)
    f = [budget.mass_fluxes(X[k], spec, forcing_at(drivers, spec, [t])) for k, t in enumerate(times)]
    fixation = np.trapezoid([x["fixation"][:, 0] for x in f], times, axis=0)
    denitrification = np.trapezoid([x["denitrification"][:, 0] for x in f], times, axis=0)
    change = budget.total_mass(X[-1], spec) - budget.total_mass(X[0], spec)
    # fixation is the larger term here, so the check sees it (a budget without it is off by > 100 %)
    assert np.all(fixation > 1.5 * denitrification)
    np.testing.assert_allclose(change[:, 0], fixation - denitrification, rtol=5e-3)
    np.testing.assert_allclose(change[:, 1], 0.0, atol=1e-10 * budget.total_mass(X[0], spec)[:, 1].max())


def test_fixation_keeps_concentrations_positive_and_phosphorus_conserved_for_huge_steps():
    # 12-hour steps, growth 20 /d, DIN ≈ 0: positivity unconditional, total P an invariant to round-off,
    # total N only gains (fixation, no sinks)
    spec, drivers, E = nitrogen_poor_closed_case(30)
    spec = replace(spec, denitrification_20_per_d=0.0,
                   groups=tuple(replace(g, mu_max_20_per_d=20.0) for g in spec.groups))
    X = integrate.simulate(E, spec, drivers, JUNE_FIRST_2026, JUNE_FIRST_2026 + np.arange(0, 31.0), dt_d=0.5)
    assert np.all(X >= 0)
    mass = budget.total_mass(X, spec)
    np.testing.assert_allclose(mass[..., 1], np.broadcast_to(mass[0, :, 1], mass.shape[:2]), rtol=1e-12, atol=0)
    assert np.all(np.diff(mass[..., 0], axis=0) >= -1e-12 * mass[0, :, 0])
    assert np.all(mass[-1, :, 0] > 1.5 * mass[0, :, 0])


def test_open_network_change_in_mass_equals_inflow_minus_outflow_minus_losses():
    # without fixers: with them the north arm's DIN turns over within an hour and the hourly quadrature
    # of the fluxes is the limit (see test_closed_network_nitrogen_changes_by_fixation_minus_denitrification)
    spec = without_fixation(three_basin_spec(sediment_phosphorus_release_20_mg_m2_d=2.0))
    drivers = summer_drivers(days=30)
    E = initial_ensemble(spec, 4)
    times = JUNE_FIRST_2026 + np.arange(0, 30 + 1e-9, 1 / 24)
    X = integrate.simulate(E, spec, drivers, JUNE_FIRST_2026, times)
    net_loss = np.array([_fluxes(X[k], spec, drivers, t) for k, t in enumerate(times)])
    change = budget.total_mass(X[-1], spec) - budget.total_mass(X[0], spec)
    expected = -np.trapezoid(net_loss, times, axis=0)
    # compare against the throughput (the inflow load), which dwarfs round-off and time-quadrature error
    inflow = np.trapezoid([budget.mass_fluxes(X[k], spec, forcing_at(drivers, spec, [t]))["inflow"]
                           for k, t in enumerate(times)], times, axis=0)
    assert np.max(np.abs(change - expected) / inflow) < 2e-4


def test_mass_fluxes_net_equals_rate_of_change_of_total_mass_from_the_tendency():
    # bookkeeping identity: d/dt Σ V·(N + D_N + a_N ΣA) equals inflow − outflow − settling − detritus
    # settling − loss − denitrification + fixation (+ release for P), with per-member release
    spec = three_basin_spec(sediment_phosphorus_release_20_mg_m2_d=1.5, detrital_fraction=0.7)
    drivers = summer_drivers(days=3)
    rng = np.random.default_rng(5)
    layout = StateLayout(spec)
    E = rng.uniform(0.1, 200.0, (6, layout.n_state))
    params = member_params(spec, 6) | {"sediment_phosphorus_release_20_mg_m2_d": rng.uniform(0.0, 5.0, (6, 3))}
    forcing = forcing_at(drivers, spec, [JUNE_FIRST_2026 + 1.5])
    dE = model.tendency(E, spec, forcing, params)
    volume = np.array([b.volume_m3 for b in spec.basins])
    dn = ((layout.nitrogen(dE) + layout.detrital_nitrogen(dE)
           + spec.nitrogen_to_chlorophyll * layout.total_chlorophyll(dE)) * volume).sum(-1)
    dp = ((layout.phosphorus(dE) + layout.detrital_phosphorus(dE)
           + spec.phosphorus_to_chlorophyll * layout.total_chlorophyll(dE)) * volume).sum(-1)
    rate = np.stack([dn, dp], -1) * 1e-6
    net = budget.mass_fluxes(E, spec, forcing, params)["net"]
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
