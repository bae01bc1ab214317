"""What-if scenarios: actions on the drivers, paired runs, and the checks against chemostat theory.

Expected values: Herbert, Elsworth & Telling (1956) J. Gen. Microbiol. 14:601 and Smith & Waltman
(1995) *The Theory of the Chemostat* (washout above the maximum net growth rate); Tilman (1982)
*Resource Competition and Community Structure* (the lowest break-even concentration R* wins);
docs/references.md, "Chemostat and competition" and "Chemostat and resource competition".
"""
from dataclasses import replace
from functools import cache

import numpy as np
import pytest
from model_scenarios import JUNE_FIRST_2026, initial_ensemble, member_params, summer_drivers, three_basin_spec

from assimilation import budget, hydraulics, light
from assimilation.forcing import forcing_at, member_drivers
from assimilation.forecast import daily_statistics
from assimilation.scenarios import (
    LoadChange,
    Release,
    Transfer,
    action_budget,
    apply_actions,
    inflows_through,
    paired_difference,
    paired_run,
    period_weights,
)
from assimilation.spec import Basin, Drivers, Group, ModelSpec, Network, StateLayout

T0 = 20605.0
VOLUME = 1.0e6
DEPTH = 2.0
SHORTWAVE = 200.0
PAR_FRACTION = 0.45
K_BACKGROUND = 0.5
SATURATION = 100.0
#: light factor of the chemostat (no self-shading), so that mu_max_20 = mu / F_LIGHT
F_LIGHT = float(light.steele_depth_average(PAR_FRACTION * SHORTWAVE, SATURATION, K_BACKGROUND, DEPTH))
STEP_D = 0.125
NO_SURFACE_EXCHANGE = np.inf


def group(name, mu, k_n, k_p, mortality=0.0, cyanobacteria=False):
    return Group(name, mu_max_20_per_d=mu / F_LIGHT, theta_growth=1.07, k_n_ugL=k_n, k_p_ugL=k_p,
                 light_saturation_W_m2=SATURATION, mortality_20_per_d=mortality, theta_mortality=1.08,
                 settling_m_per_d=0.0, is_cyanobacteria=cyanobacteria)


def chemostat(groups, dilution_per_d, days, nitrogen_in=10.0, phosphorus_in=1.0e4):
    """One basin at 20 °C, constant light and inflow; drivers on the integrator's 3-hour steps."""
    spec = ModelSpec(
        basins=(Basin("culture_vessel", VOLUME, DEPTH, VOLUME / DEPTH),), groups=tuple(groups),
        network=Network(downstream=(-1,), inflow_basin=(0,)), par_fraction=PAR_FRACTION,
        background_attenuation_per_m=K_BACKGROUND, chlorophyll_attenuation_m2_mg=0.0,
        nitrogen_to_chlorophyll=2.0, phosphorus_to_chlorophyll=1.0, recycled_fraction=0.0,
        sediment_phosphorus_release_20_mg_m2_d=0.0, denitrification_20_per_d=0.0,
        detrital_fraction=0.0)  # a culture vessel: what dies leaves with the outflow (no detritus)
    t = T0 + np.arange(0.0, days + 1e-9, STEP_D)
    n = t.size
    q = dilution_per_d * VOLUME / 86400.0
    drivers = Drivers(t, np.full((n, 1), 20.0), np.full(n, SHORTWAVE), np.full((n, 1), q),
                      np.full((n, 1), nitrogen_in), np.full((n, 1), phosphorus_in))
    return spec, drivers


def flow_for(dilution_per_d):
    """Flow [m³/s] that gives the chemostat vessel a dilution rate [1/d]."""
    return dilution_per_d * VOLUME / 86400.0


def run_pair(spec, drivers, actions, E, days, *, params=None, dt_d=STEP_D):
    scenario = apply_actions(spec, drivers, actions, T0, surface_relaxation_d=NO_SURFACE_EXCHANGE)
    return paired_run(E, scenario, T0, T0 + np.arange(0.0, days + 1e-9, 1.0), params=params, dt_d=dt_d)


# --------------------------------------------------------------------------
# Chemostat washout (Herbert, Elsworth & Telling 1956; Smith & Waltman 1995)

MU, K_N, MORTALITY, BASE_D, N_IN = 1.0, 0.5, 0.1, 0.1, 10.0
#: maximum net growth rate at the inflow concentration: mu·S_in/(K + S_in) − m = 0.8524 /d
MAX_NET_GROWTH = MU * N_IN / (K_N + N_IN) - MORTALITY


def washout_case(release_dilution_per_d, days, dt_d=STEP_D):
    spec, drivers = chemostat([group("single", MU, K_N, 1e-3, mortality=MORTALITY)], BASE_D, days)
    E = StateLayout(spec).pack([[2.0]], [[1.0e4]], [[[3.0]]])
    return spec, run_pair(spec, drivers, [Release(0, flow_for(release_dilution_per_d), 0.0, 10 * days)], E, days,
                          dt_d=dt_d)


def test_release_raising_dilution_above_maximum_net_growth_washes_the_group_out():
    # D = 0.1 + 1.1 = 1.2 /d > 0.852 /d: washout (Herbert et al. 1956)
    spec, pair = washout_case(1.1, 80)
    layout = StateLayout(spec)
    assert BASE_D + 1.1 > MAX_NET_GROWTH
    assert layout.chlorophyll(pair.with_action)[-1, 0, 0, 0] < 1e-6
    # the substrate returns to the inflow concentration once the group is gone
    assert layout.nitrogen(pair.with_action)[-1, 0, 0] == pytest.approx(N_IN, rel=1e-5)
    # without the release the group holds at its chemostat steady state (it survives D = 0.1)
    assert layout.chlorophyll(pair.without)[-1, 0, 0, 0] > 1.0


def test_release_keeping_dilution_below_maximum_net_growth_does_not_wash_the_group_out():
    # D = 0.1 + 0.6 = 0.7 /d < 0.852 /d: the group survives at R* = K·(D + m)/(mu − D − m) = 2.0 and
    # X* = D·Y·(S_in − R*)/(D + m) = 3.5 (Tilman 1982; docs/references.md, chemostat with mortality)
    spec, pair = washout_case(0.6, 150)
    layout = StateLayout(spec)
    D = BASE_D + 0.6
    r_star = K_N * (D + MORTALITY) / (MU - D - MORTALITY)
    assert r_star == pytest.approx(2.0)
    assert layout.nitrogen(pair.with_action)[-1, 0, 0] == pytest.approx(r_star, rel=1e-4)
    assert layout.chlorophyll(pair.with_action)[-1, 0, 0, 0] == pytest.approx(D * 0.5 * (N_IN - r_star) / (D + MORTALITY),
                                                                            rel=1e-4)


def test_washout_proceeds_at_the_analytic_rate_of_dilution_minus_net_growth():
    # once the substrate is back at S_in, dA/dt = (mu·S_in/(K + S_in) − m − D)·A: ln A falls at
    # D − MAX_NET_GROWTH = 1.2 − 0.852 = 0.348 /d (Smith & Waltman 1995, ch. 1). Hourly steps, as
    # the forecast takes: the scheme's decay rate is second-order accurate, (r·h)² ≈ 2e-4 here
    spec, pair = washout_case(1.1, 40, dt_d=1 / 24)
    A = StateLayout(spec).chlorophyll(pair.with_action)[:, 0, 0, 0]
    rate = -(np.log(A[35]) - np.log(A[25])) / 10.0
    assert rate == pytest.approx(BASE_D + 1.1 - MAX_NET_GROWTH, rel=1e-3)


# --------------------------------------------------------------------------
# Resource competition (Tilman 1982)

D_COMPETITION = 0.5
#: cyanobacteria: low K_N, high K_P → R*_N = 0.5·0.5/0.5 = 0.5, R*_P = 2.0·0.5/0.5 = 2.0 µg/L
CYANO = dict(mu=1.0, k_n=0.5, k_p=2.0)
#: the other group: R*_N = 2.0, R*_P = 0.5 µg/L
GREEN = dict(mu=1.0, k_n=2.0, k_p=0.5)
CUT_DAY = 60.0


def r_star(k, mu, d=D_COMPETITION):
    return k * d / (mu - d)


@cache
def competition(cut_percent):
    """Nitrogen-limited chemostat (N_in 10, P_in 100) where the cyanobacteria dominate; from day 150
    the inflow phosphorus is cut by ``cut_percent`` (the other group, by then excluded to about
    1e-8 µg/L, needs about 100 days to take over); 300 days in all."""
    groups = [group("cyanobacteria", CYANO["mu"], CYANO["k_n"], CYANO["k_p"], cyanobacteria=True),
              group("green_algae", GREEN["mu"], GREEN["k_n"], GREEN["k_p"])]
    spec, drivers = chemostat(groups, D_COMPETITION, 300, nitrogen_in=10.0, phosphorus_in=100.0)
    E = StateLayout(spec).pack([[10.0]], [[100.0]], [[[0.5, 0.5]]])
    return spec, run_pair(spec, drivers, [LoadChange(0, CUT_DAY, phosphorus_percent=cut_percent)], E, 300)


def test_nitrogen_limited_chemostat_is_dominated_by_the_lower_nitrogen_r_star_before_the_cut():
    spec, pair = competition(-99.0)
    layout = StateLayout(spec)
    A = layout.chlorophyll(pair.without)[:, 0, 0]
    # R*_N of the cyanobacteria (0.5) is below the other group's (2.0): they exclude it (Tilman 1982)
    assert layout.nitrogen(pair.without)[-1, 0, 0] == pytest.approx(r_star(CYANO["k_n"], CYANO["mu"]), rel=1e-4)
    assert A[-1, 1] < 1e-6 * A[-1, 0]
    # the paired run is the same until the cut
    np.testing.assert_array_equal(pair.with_action[:int(CUT_DAY)], pair.without[:int(CUT_DAY)])


def test_cutting_inflow_phosphorus_below_the_cyanobacteria_r_star_hands_dominance_to_the_lower_r_star():
    # P_in 100 → 1.0 µg/L, below R*_P of the cyanobacteria (2.0) and above the other group's (0.5):
    # the cyanobacteria wash out and the other group settles at P* = R*_P = 0.5, A* = (P_in − P*)/a_P = 0.5
    spec, pair = competition(-99.0)
    layout = StateLayout(spec)
    p_in = 100.0 * (1 - 0.99)
    assert r_star(GREEN["k_p"], GREEN["mu"]) < p_in < r_star(CYANO["k_p"], CYANO["mu"])
    A = layout.chlorophyll(pair.with_action)[-1, 0, 0]
    assert A[0] < 1e-6
    assert layout.phosphorus(pair.with_action)[-1, 0, 0] == pytest.approx(r_star(GREEN["k_p"], GREEN["mu"]), rel=1e-4)
    assert A[1] == pytest.approx((p_in - r_star(GREEN["k_p"], GREEN["mu"])) / spec.phosphorus_to_chlorophyll, rel=1e-4)


def test_a_phosphorus_cut_that_leaves_nitrogen_limiting_keeps_the_cyanobacteria_dominant():
    # P_in 100 → 50: the cyanobacteria need only a_P·X* = 4.75 µg P/L, so nitrogen still limits
    # and the lower R*_N still wins (the resource-ratio prediction for a supply point in its region)
    spec, pair = competition(-50.0)
    A = StateLayout(spec).chlorophyll(pair.with_action)[-1, 0, 0]
    assert A[0] == pytest.approx(0.5 * (10.0 - r_star(CYANO["k_n"], CYANO["mu"])), rel=1e-4)
    assert A[1] < 1e-6 * A[0]


# --------------------------------------------------------------------------
# Pairing and mass balance on a three-basin reservoir


def reservoir(members=6, days=6):
    spec = three_basin_spec(sediment_phosphorus_release_20_mg_m2_d=2.0)
    base = summer_drivers(days=days)
    temps = [replace(base, water_temperature_C=base.water_temperature_C + dT) for dT in (-1.5, 0.0, 1.5)]
    return spec, member_drivers(temps, members), initial_ensemble(spec, members), member_params(spec, members)


ACTIONS = {
    "release through the north arm": [Release(0, 8.0, 1.0, 3.0)],
    "release through the central basin": [Release(1, 5.0, 0.5, 2.0)],
    "transfer of cold clean water": [Transfer(1, 6.0, 2.0, 2.5, 50.0, 2.0, 12.0)],
    "transfer at the basin's temperature": [Transfer(2, 3.0, 0.0, 6.0, 400.0, 40.0)],
    "inflow load cut": [LoadChange(0, 1.0, nitrogen_percent=-30.0, phosphorus_percent=-80.0)],
    "all combined": [Release(0, 4.0, 0.0, 2.0), Transfer(1, 2.0, 1.0, 1.0, 100.0, 5.0, 15.0),
                     LoadChange(1, 2.0, phosphorus_percent=50.0)],
}


def test_no_op_actions_give_a_paired_difference_of_exactly_zero():
    spec, drivers, E, params = reservoir()
    noop = [Release(0, 0.0, 1.0, 3.0), Transfer(1, 0.0, 0.0, 2.0, 300.0, 30.0, 10.0),
            LoadChange(0, 1.0, 0.0, 0.0)]
    scenario = apply_actions(spec, drivers, noop, JUNE_FIRST_2026, surface_relaxation_d=[1.1, 3.0, 5.6])
    times = JUNE_FIRST_2026 + np.arange(0, 6 * 24 + 1) / 24
    pair = paired_run(E, scenario, JUNE_FIRST_2026, times, params=params)
    chl = StateLayout(scenario.spec).total_chlorophyll
    fc = [daily_statistics(times, chl(x), JUNE_FIRST_2026, 6, (10.0, 50.0)) for x in (pair.without, pair.with_action)]
    d = paired_difference(*fc)
    assert np.all(d.quantiles == 0.0) and np.all(d.mean == 0.0) and np.all(d.exceedance == 0.0)
    np.testing.assert_array_equal(pair.with_action, pair.without)
    # and a real action on the same pair does differ, so the pairing is not trivially equal
    real = apply_actions(spec, drivers, [Release(0, 1.0, 1.0, 3.0)], JUNE_FIRST_2026,
                         surface_relaxation_d=[1.1, 3.0, 5.6])
    assert np.abs(paired_run(E, real, JUNE_FIRST_2026, times, params=params).with_action - pair.without).max() > 0.1


@pytest.mark.parametrize("name", list(ACTIONS))
def test_water_and_nutrient_mass_in_out_and_stored_balance_for_every_action(name):
    actions = ACTIONS[name]
    spec, drivers, E, params = reservoir(members=4)
    spec = replace(spec, groups=tuple(replace(g, nitrogen_fixing=False) for g in spec.groups))
    scenario = apply_actions(spec, drivers, actions, JUNE_FIRST_2026, surface_relaxation_d=[1.1, 3.0, 5.6])
    times = JUNE_FIRST_2026 + np.arange(0, 6 * 24 + 1) / 24
    pair = paired_run(E, scenario, JUNE_FIRST_2026, times, params=params)
    s = scenario.spec
    leaves = np.array([d == -1 for d in s.network.downstream])
    for drv, X in ((scenario.without, pair.without), (scenario.with_action, pair.with_action)):
        f = forcing_at(drv, s, times)
        # water: constant volumes, so what flows in leaves at the outlet at every time
        out = hydraulics.basin_outflows(s.network, f.inflow_m3_s)[:, leaves].sum(axis=1)
        np.testing.assert_allclose(out, f.inflow_m3_s.sum(axis=1), rtol=1e-12)
        # nutrients: stored change = ∫ (in − out − sinks + sources) dt, hourly quadrature as in
        # tests/assimilation/test_mass_balance.py (open network), against the inflow load
        fluxes = [budget.mass_fluxes(X[k], s, forcing_at(drv, s, [t]), params) for k, t in enumerate(times)]
        net = np.trapezoid([x["net"] for x in fluxes], times, axis=0)
        inflow = np.trapezoid([x["inflow"] for x in fluxes], times, axis=0)
        change = budget.total_mass(X[-1], s) - budget.total_mass(X[0], s)
        assert np.max(np.abs(change - net) / inflow) < 2e-4
    # the action's budget is the difference of the two runs' inflow terms (an independent computation)
    b = action_budget(scenario, times)
    load = [np.trapezoid([budget.mass_fluxes(X[k], s, forcing_at(drv, s, [t]))["inflow"][0]
                          for k, t in enumerate(times)], times, axis=0)
            for drv, X in ((scenario.without, pair.without), (scenario.with_action, pair.with_action))]
    np.testing.assert_allclose([b["nitrogen_kg"].sum(), b["phosphorus_kg"].sum()], load[1] - load[0],
                               rtol=1e-9, atol=1e-9 * load[0].max())
    # and the water it costs is exactly flow × duration
    expected = sum(a.flow_m3_s * min(a.duration_d, 6.0 - a.start_d) * 86400.0 for a in actions
                   if not isinstance(a, LoadChange))
    assert b["water_m3"].sum() == pytest.approx(expected, rel=1e-9, abs=1e-6)


def test_a_load_cut_removes_the_expected_phosphorus_load():
    # −80 % of the north creek's SRP (45 µg/L at 1.2 m³/s, held steady) from day 1 to day 6:
    # 0.8 · 45 µg/L · 1.2 m³/s · 86400 s/d · 5 d = 18.66 kg
    spec, drivers, _E, _p = reservoir()
    steady = replace(drivers, inflow_m3_s=np.tile([1.2, 3.0], (drivers.time_d.size, 1)),
                     inflow_phosphorus_ugL=np.tile([45.0, 30.0], (drivers.time_d.size, 1)))
    scenario = apply_actions(spec, steady, ACTIONS["inflow load cut"], JUNE_FIRST_2026,
                             surface_relaxation_d=[1.1, 3.0, 5.6])
    b = action_budget(scenario, JUNE_FIRST_2026 + np.arange(0, 6 * 24 + 1) / 24)
    assert b["phosphorus_kg"].sum() == pytest.approx(-0.8 * 45.0 * 1.2 * 86400 * 5 * 1e-6, rel=1e-9)
    assert b["water_m3"].sum() == 0.0


# --------------------------------------------------------------------------
# How the actions are put into the drivers


def test_period_weights_deliver_exactly_the_volume_of_the_period_under_linear_interpolation():
    t = np.arange(0.0, 5.0 + 1e-9, 1 / 24)
    for start, end in ((0.0, 3.0), (1.0, 2.5), (0.3, 1.77), (4.0, 9.0)):
        w = period_weights(t, start, end)
        assert np.trapezoid(w, t) == pytest.approx(min(end, 5.0) - start, rel=1e-12)
        assert np.all((w >= 0) & (w <= 1))
        assert np.all(w[(t > start + 1 / 24) & (t < end - 1 / 24)] == 1.0)
        assert np.all(w[(t < start - 1 / 24) | (t > end + 1 / 24)] == 0.0)


def test_release_is_made_up_by_the_inflows_feeding_the_basin_in_proportion_to_their_flow():
    spec, drivers, _E, _p = reservoir()
    assert inflows_through(spec.network, 0) == [0]
    assert inflows_through(spec.network, 2) == [0, 1]
    scenario = apply_actions(spec, drivers, [Release(2, 10.0, 1.0, 2.0)], JUNE_FIRST_2026,
                             surface_relaxation_d=NO_SURFACE_EXCHANGE)
    extra = scenario.with_action.inflow_m3_s[:, 2:]
    assert scenario.spec.network.inflow_basin == (0, 1, 0, 1)
    rel = drivers.time_d - JUNE_FIRST_2026
    inside = (rel > 1.05) & (rel < 2.95)
    np.testing.assert_allclose(extra[inside].sum(axis=1), 10.0, rtol=1e-12)
    share = drivers.inflow_m3_s[inside] / drivers.inflow_m3_s[inside].sum(axis=1, keepdims=True)
    np.testing.assert_allclose(extra[inside] / 10.0, share, rtol=1e-12)
    # the released water carries each inflow's own concentrations
    np.testing.assert_array_equal(scenario.with_action.inflow_phosphorus_ugL[:, 2:], drivers.inflow_phosphorus_ugL)
    assert np.all(scenario.without.inflow_m3_s[:, 2:] == 0.0)


def test_release_through_a_basin_that_no_inflow_feeds_is_refused():
    spec, drivers, _E, _p = reservoir()
    dry = replace(spec, network=Network((1, 2, -1), (1,)))
    one = Drivers(drivers.time_d, drivers.water_temperature_C, drivers.shortwave_W_m2, drivers.inflow_m3_s[:, 1:],
                  drivers.inflow_nitrogen_ugL[:, 1:], drivers.inflow_phosphorus_ugL[:, 1:])
    with pytest.raises(ValueError, match="no inflow feeds basin 'north_arm'"):
        apply_actions(dry, one, [Release(0, 1.0, 0.0, 1.0)], JUNE_FIRST_2026, surface_relaxation_d=1.0)


def test_release_while_the_feeding_inflows_are_dry_is_refused():
    spec, drivers, _E, _p = reservoir()
    dry = replace(drivers, inflow_m3_s=np.zeros_like(drivers.inflow_m3_s))
    with pytest.raises(ValueError, match="the inflows feeding basin 'north_arm' carry no water during the release"):
        apply_actions(spec, dry, [Release(0, 1.0, 0.0, 1.0)], JUNE_FIRST_2026, surface_relaxation_d=1.0)


def test_action_after_the_last_driver_time_is_refused():
    spec, drivers, _E, _p = reservoir(days=2)
    with pytest.raises(ValueError, match="holds none of the driver times"):
        apply_actions(spec, drivers, [Transfer(0, 1.0, 3.0, 1.0, 10.0, 1.0)], JUNE_FIRST_2026,
                      surface_relaxation_d=1.0)


@pytest.mark.parametrize(("action", "message"), [
    (lambda: Release(0, -1.0, 0.0, 1.0), "flow_m3_s must be ≥ 0"),
    (lambda: Release(0, 1.0, 0.0, 0.0), "duration_d must be > 0"),
    (lambda: Transfer(0, 1.0, 0.0, 1.0, float("nan"), 1.0), "nitrogen_ugL must be finite"),
    (lambda: LoadChange(0, 0.0, phosphorus_percent=-120.0), "phosphorus_percent must be ≥ -100"),
    (lambda: Release(-1, 1.0, 0.0, 1.0), "basin must be a non-negative integer index"),
])
def test_actions_check_their_numbers(action, message):
    with pytest.raises(ValueError, match=message):
        action()


# --------------------------------------------------------------------------
# Temperature of transferred water


def test_transfer_brings_a_basin_to_the_flow_weighted_mixing_temperature():
    # heat balance of a well-mixed box without surface exchange: at steady state the basin holds the
    # flow-weighted mean of what enters, θ = q/(Q + q)·(T_x − T) (conservation of heat)
    spec, drivers = chemostat([group("single", MU, K_N, 1e-3)], 0.2, 60)
    q = flow_for(0.3)
    scenario = apply_actions(spec, drivers, [Transfer(0, q, 0.0, 100.0, 10.0, 1.0, 5.0)], T0,
                             surface_relaxation_d=NO_SURFACE_EXCHANGE)
    theta = scenario.with_action.water_temperature_C[:, 0] - 20.0
    assert theta[-1] == pytest.approx(0.3 / (0.2 + 0.3) * (5.0 - 20.0), rel=1e-9)
    # with surface exchange the anomaly is held down: θ = (q/V)(T_x − T)/(D + 1/τ)
    tau = 2.0
    scenario = apply_actions(spec, drivers, [Transfer(0, q, 0.0, 100.0, 10.0, 1.0, 5.0)], T0,
                             surface_relaxation_d=tau)
    theta = scenario.with_action.water_temperature_C[:, 0] - 20.0
    assert theta[-1] == pytest.approx(0.3 * (5.0 - 20.0) / (0.5 + 1 / tau), rel=1e-9)
    assert np.all(scenario.without.water_temperature_C == 20.0)


def test_release_of_the_basins_own_supply_leaves_its_temperature_alone_but_warms_downstream():
    # the released water enters at the temperature of the basin it enters; passed on faster, the
    # warmer north arm's water raises the central basin's temperature
    spec, drivers, _E, _p = reservoir()
    scenario = apply_actions(spec, drivers, [Release(0, 20.0, 0.0, 5.0)], JUNE_FIRST_2026,
                             surface_relaxation_d=[1.1, 3.0, 5.6])
    theta = scenario.with_action.water_temperature_C - scenario.without.water_temperature_C
    assert np.abs(theta[..., 0]).max() < 1e-12
    assert theta[-1, :, 1].min() > 0.01
