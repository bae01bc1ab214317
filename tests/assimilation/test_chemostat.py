"""The model reduced to a chemostat: one basin, constant inflow, constant light.

Expected values: Monod (1950); Herbert, Elsworth & Telling (1956) J. Gen.
Microbiol. 14:601; Hsu, Hubbell & Waltman (1977) SIAM J. Appl. Math. 32:366;
Tilman (1982) Resource Competition and Community Structure.
"""
from dataclasses import replace

import numpy as np
import pytest

from assimilation import budget, integrate, light
from assimilation.spec import Basin, Drivers, Group, ModelSpec, Network, StateLayout

T0 = 20605.0
VOLUME = 1.0e6
SHORTWAVE = 200.0
PAR_FRACTION = 0.45
K_BACKGROUND = 0.5
DEPTH = 2.0
SATURATION = 100.0
#: light factor of the chemostat (no self-shading), so that mu_max_20 = mu / F_LIGHT
F_LIGHT = float(light.steele_depth_average(PAR_FRACTION * SHORTWAVE, SATURATION, K_BACKGROUND, DEPTH))


def group(name, mu, k_n, mortality=0.0, k_p=1e-3):
    return Group(name, mu_max_20_per_d=mu / F_LIGHT, theta_growth=1.07, k_n_ugL=k_n, k_p_ugL=k_p,
                 light_saturation_W_m2=SATURATION, mortality_20_per_d=mortality, theta_mortality=1.08,
                 settling_m_per_d=0.0)


def chemostat(groups, dilution_per_d, yield_chl_per_n=0.5, recycled=0.0, nitrogen_in=10.0, phosphorus_in=1.0e4):
    spec = ModelSpec(
        basins=(Basin("culture_vessel", VOLUME, DEPTH, VOLUME / DEPTH),),
        groups=tuple(groups), network=Network(downstream=(-1,), inflow_basin=(0,)),
        par_fraction=PAR_FRACTION, background_attenuation_per_m=K_BACKGROUND, chlorophyll_attenuation_m2_mg=0.0,
        nitrogen_to_chlorophyll=1.0 / yield_chl_per_n, phosphorus_to_chlorophyll=1.0, recycled_fraction=recycled,
        denitrification_20_per_d=0.0, sediment_phosphorus_release_20_mg_m2_d=0.0,
        detrital_fraction=0.0)  # a culture vessel: no sediment, and what dies leaves (no detritus)
    q = dilution_per_d * VOLUME / 86400.0
    t = np.array([T0, T0 + 2000.0])
    drivers = Drivers(time_d=t, water_temperature_C=np.full((2, 1), 20.0), shortwave_W_m2=np.full(2, SHORTWAVE),
                      inflow_m3_s=np.full((2, 1), q), inflow_nitrogen_ugL=np.full((2, 1), nitrogen_in),
                      inflow_phosphorus_ugL=np.full((2, 1), phosphorus_in))
    return spec, drivers


#: A steady state of the equations is a fixed point of the Patankar scheme whatever the step,
#: so 3-hour steps reach the same steady state as hourly ones, faster.
STEP_D = 0.125


def run(spec, drivers, days, chlorophyll0):
    layout = StateLayout(spec)
    E = layout.pack([[5.0]], [[1.0e4]], [[chlorophyll0]])
    out = integrate.advance(E, spec, drivers, T0, T0 + days, dt_d=STEP_D)
    return layout.nitrogen(out)[0, 0], layout.chlorophyll(out)[0, 0]


def test_chemostat_steady_state_matches_break_even_concentration_and_yield():
    # mu_max 1.0 /d, K 0.5, D 0.25 /d, Y 0.5, S_in 10 → S* = K·D/(mu − D) = 0.1667, X* = Y·(S_in − S*) = 4.9167
    spec, drivers = chemostat([group("single", 1.0, 0.5)], 0.25)
    N, A = run(spec, drivers, 400.0, [0.5])
    assert N == pytest.approx(0.5 * 0.25 / (1.0 - 0.25), rel=1e-4)
    assert N == pytest.approx(0.1667, abs=5e-5)
    assert A[0] == pytest.approx(4.9167, abs=5e-4)


def test_chemostat_with_mortality_breaks_even_at_total_loss_rate():
    # Tilman (1982): R* = K·(D + m)/(mu − D − m); without recycling X* = D·Y·(S_in − R*)/(D + m)
    D, m, K, mu = 0.2, 0.1, 0.5, 1.0
    spec, drivers = chemostat([group("single", mu, K, mortality=m)], D)
    N, A = run(spec, drivers, 400.0, [0.5])
    r_star = K * (D + m) / (mu - D - m)
    assert N == pytest.approx(r_star, rel=1e-4)
    assert A[0] == pytest.approx(D * 0.5 * (10.0 - r_star) / (D + m), rel=1e-4)


def test_chemostat_with_detritus_returns_the_dead_algae_through_remineralisation():
    # configured with detritus: all mortality becomes detrital N (no recycling at once, no settling),
    # remineralised at k. Growth still balances D + m, so R* = K·(D + m)/(mu − D − m) (Tilman 1982) is
    # unchanged; the mass balance of the vessel, D·(S_in − N − D_N − A/Y) = 0, and the detritus balance,
    # m·A/Y = (k + D)·D_N, give A* = Y·(S_in − R*)/(1 + m/(k + D)) and D_N* = m·A*/(Y·(k + D))
    # [computed from the chemostat balances above].
    D, m, K, mu, k = 0.2, 0.1, 0.5, 1.0, 0.3
    spec, drivers = chemostat([group("single", mu, K, mortality=m)], D)
    spec = replace(spec, detrital_fraction=1.0, nitrogen_remineralisation_20_per_d=k, detritus_settling_m_per_d=0.0)
    layout = StateLayout(spec)
    X = integrate.advance(layout.pack([[5.0]], [[1.0e4]], [[[0.5]]]), spec, drivers, T0, T0 + 400.0, dt_d=STEP_D)
    r_star = K * (D + m) / (mu - D - m)
    a_star = 0.5 * (10.0 - r_star) / (1.0 + m / (k + D))
    assert layout.nitrogen(X)[0, 0] == pytest.approx(r_star, rel=1e-4)
    assert layout.chlorophyll(X)[0, 0, 0] == pytest.approx(a_star, rel=1e-4)
    assert layout.chlorophyll(X)[0, 0, 0] == pytest.approx(4.0774, abs=1e-4)   # 3.2619 without detritus
    assert layout.detrital_nitrogen(X)[0, 0] == pytest.approx(m * a_star / (0.5 * (k + D)), rel=1e-4)


def test_chemostat_washes_out_when_mu_max_is_below_dilution():
    # washout when D ≥ mu_max·S_in/(K + S_in) (Herbert et al. 1956); here mu_max 0.2 < D 0.25
    spec, drivers = chemostat([group("slow", 0.2, 0.5)], 0.25)
    N, A = run(spec, drivers, 300.0, [2.0])
    assert A[0] < 1e-6
    assert N == pytest.approx(10.0, rel=1e-5)


def test_chemostat_critical_dilution_separates_survival_from_washout():
    # critical D = mu_max·S_in/(K + S_in) = 1.0·10/10.5 = 0.9524 /d (docs/references.md [computed])
    survive_spec, drivers = chemostat([group("single", 1.0, 0.5)], 0.90)
    _, A_survive = run(survive_spec, drivers, 300.0, [1.0])
    wash_spec, drivers = chemostat([group("single", 1.0, 0.5)], 1.00)
    _, A_wash = run(wash_spec, drivers, 300.0, [1.0])
    assert A_survive[0] == pytest.approx(0.5 * (10.0 - 0.5 * 0.9 / 0.1), rel=1e-3)
    assert A_wash[0] < 1e-6


def test_two_groups_on_one_nutrient_lowest_break_even_concentration_wins():
    # Hsu, Hubbell & Waltman (1977); Tilman (1982) R* rule. D = 0.5:
    # (mu 1.0, K 0.5) → λ = 0.5 and (mu 2.0, K 2.0) → λ = 0.667: the slower grower wins
    spec, drivers = chemostat([group("slow_grower", 1.0, 0.5), group("fast_grower", 2.0, 2.0)], 0.5)
    N, A = run(spec, drivers, 500.0, [1.0, 1.0])
    assert N == pytest.approx(0.5, rel=1e-4)
    assert A[0] == pytest.approx(0.5 * (10.0 - 0.5), rel=1e-4)
    assert A[1] < 1e-6 * A[0]


def test_steady_state_is_kept_by_hourly_and_six_hourly_steps():
    spec, drivers = chemostat([group("single", 1.0, 0.5)], 0.25)
    layout = StateLayout(spec)
    n_star = 0.5 * 0.25 / 0.75
    a_star = 0.5 * (10.0 - n_star)
    E = layout.pack([[n_star]], [[1.0e4 - a_star]], [[[a_star]]])     # phosphorus_to_chlorophyll = 1
    hourly = integrate.advance(E, spec, drivers, T0, T0 + 20.0, dt_d=1 / 24)
    six_hourly = integrate.advance(E, spec, drivers, T0, T0 + 20.0, dt_d=0.25)
    np.testing.assert_allclose(hourly, E, rtol=1e-9)
    np.testing.assert_allclose(six_hourly, E, rtol=1e-9)


def test_the_other_order_of_break_even_concentrations_reverses_the_winner():
    # same pair at D = 0.5, but the fast grower with K = 0.5 has λ = 0.167 < 0.5
    spec, drivers = chemostat([group("slow_grower", 1.0, 0.5), group("fast_grower", 2.0, 0.5)], 0.5)
    N, A = run(spec, drivers, 500.0, [1.0, 1.0])
    assert N == pytest.approx(0.5 * 0.5 / 1.5, rel=1e-4)
    assert A[0] < 1e-6 * A[1]


def fixer(name, mu, k_n, fraction, k_p=1e-3):
    return replace(group(name, mu, k_n, k_p=k_p), nitrogen_fixing=True, fixation_growth_fraction=fraction)


def test_batch_without_din_fixer_grows_at_the_cost_reduced_rate_and_non_fixer_does_not():
    # closed batch (no flow), DIN = 0, phosphorus in excess: a fixer's N limitation is its floor, so it
    # grows exponentially at fraction · mu_max (PCLake / CAEDYM floor form, from memory); a non-fixer
    # has f_N = 0 and stays put. All the fixer's N comes from N2, none from DIN.
    mu, fraction, days = 1.0, 0.4, 5.0
    spec, drivers = chemostat([fixer("fixer", mu, 0.5, fraction), group("non_fixer", mu, 0.5)], 0.0)
    layout = StateLayout(spec)
    E = layout.pack([[0.0]], [[1.0e4]], [[[0.5, 0.5]]])
    X = integrate.advance(E, spec, drivers, T0, T0 + days, dt_d=1 / 24)
    A = layout.chlorophyll(X)[0, 0]
    assert A[0] == pytest.approx(0.5 * np.exp(fraction * mu * days), rel=1e-4)
    assert A[1] == pytest.approx(0.5, rel=1e-12)
    assert layout.nitrogen(X)[0, 0] == 0.0
    # total N rose by exactly the fixed N (yield 0.5 → 2 µg N per µg chl-a); total P is conserved
    fixed = spec.nitrogen_to_chlorophyll * (A[0] - 0.5)
    assert budget.total_nitrogen(X, spec)[0, 0] - budget.total_nitrogen(E, spec)[0, 0] == pytest.approx(fixed, rel=1e-12)
    assert budget.total_phosphorus(X, spec)[0, 0] == pytest.approx(budget.total_phosphorus(E, spec)[0, 0], rel=1e-13)


def test_fixer_in_nitrogen_free_chemostat_becomes_phosphorus_limited_at_its_break_even_concentration():
    # inflow without DIN: the fixer survives when fraction · mu > D and grows until phosphorus limits it,
    # then min(fraction, P/(K_P + P)) · mu = D gives P* = K_P·D/(mu − D) and X* = (P_in − P*)/a_P
    # (the chemostat result of Monod 1950 / Herbert et al. 1956 on phosphorus); DIN stays zero
    mu, k_p, D, p_in = 1.0, 0.5, 0.25, 10.0
    spec, drivers = chemostat([fixer("fixer", mu, 0.5, 0.5, k_p=k_p)], D, nitrogen_in=0.0, phosphorus_in=p_in)
    layout = StateLayout(spec)
    E = layout.pack([[0.0]], [[p_in]], [[[0.5]]])
    X = integrate.advance(E, spec, drivers, T0, T0 + 400.0, dt_d=STEP_D)
    p_star = k_p * D / (mu - D)
    assert layout.phosphorus(X)[0, 0] == pytest.approx(p_star, rel=1e-4)
    assert layout.chlorophyll(X)[0, 0, 0] == pytest.approx((p_in - p_star) / spec.phosphorus_to_chlorophyll, rel=1e-4)
    assert layout.nitrogen(X)[0, 0] == 0.0


def test_fixer_washes_out_of_nitrogen_free_chemostat_when_its_fixing_rate_is_below_dilution():
    # fraction · mu = 0.2 < D = 0.25: without DIN even the fixer cannot hold on
    spec, drivers = chemostat([fixer("fixer", 1.0, 0.5, 0.2, k_p=0.5)], 0.25, nitrogen_in=0.0, phosphorus_in=10.0)
    layout = StateLayout(spec)
    X = integrate.advance(layout.pack([[0.0]], [[10.0]], [[[2.0]]]), spec, drivers, T0, T0 + 300.0, dt_d=STEP_D)
    assert layout.chlorophyll(X)[0, 0, 0] < 1e-5
