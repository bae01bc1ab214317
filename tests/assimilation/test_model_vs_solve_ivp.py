"""The fixed-step integrator against scipy's solve_ivp on the same equations.

Reference: scipy.integrate.solve_ivp, LSODA (Hindmarsh 1983; Petzold 1983),
rtol = atol = 1e-8, on :func:`assimilation.model.rhs`, the unsplit tendency
with the drivers interpolated linearly in time.

Stated tolerance at dt = 1 h, over 60 summer days of an invented 3-basin
reservoir with hourly light, storms and per-member rates, groups without
nitrogen fixation:
    max |X − X_ref| / (|X_ref| + 0.1 µg/L) ≤ 0.05
(measured 0.026 when written), and halving the step cuts the difference
by at least 3× (second order: 4×).

With the default groups (cyanobacteria fix N2) the north arm's DIN is taken
down from ~7 to ~0.5 µg/L within hours every day, crossing the fixers'
threshold twice a day, and SRP crashes when the bloom peaks: hourly steps
then lag or lead the crash by hours. Measured on the same scenario with
the default spec (detrital pools, sediment release 1 mg P/m²/d): 0.26 at
1 h, 0.22 at 30 min, 0.081 at 15 min, 0.023 at 7.5 min (second order from
15 min down; before the detrital pools and the release, 0.36, 0.13, 0.034,
0.0087: with more phosphorus the bloom and its crash are sharper, so the
asymptotic range starts at shorter steps). Stated: ≤ 0.5 at 1 h, and
halving 15 min → 7.5 min cuts the difference by at least 3×.
"""
from dataclasses import replace

import numpy as np
import pytest
from model_scenarios import JUNE_FIRST_2026, initial_ensemble, member_params, summer_drivers, three_basin_spec
from scipy.integrate import solve_ivp

from assimilation import budget, integrate, model
from assimilation.forcing import forcing_at
from assimilation.spec import StateLayout

FLOOR_UGL = 0.1
TOLERANCE_1H = 0.05
TOLERANCE_1H_WITH_FIXATION = 0.5


def without_fixation(spec):
    return replace(spec, groups=tuple(replace(g, nitrogen_fixing=False) for g in spec.groups))


def reference_case(spec):
    drivers = summer_drivers(days=60)
    E = initial_ensemble(spec, 3)
    params = member_params(spec, 3)
    save = JUNE_FIRST_2026 + np.arange(0.0, 61.0)
    sol = solve_ivp(model.rhs, (save[0], save[-1]), E.ravel(), method="LSODA", rtol=1e-8, atol=1e-8,
                    t_eval=save, args=(spec, drivers, params))
    assert sol.status == 0, sol.message
    reference = sol.y.T.reshape(save.size, *E.shape)
    return spec, drivers, E, params, save, reference


@pytest.fixture(scope="module")
def case():
    return reference_case(without_fixation(three_basin_spec()))


@pytest.fixture(scope="module")
def fixation_case():
    spec = three_basin_spec()
    assert any(g.nitrogen_fixing for g in spec.groups)
    return reference_case(spec)


@pytest.fixture(scope="module")
def small_case():
    spec = three_basin_spec()
    return spec, summer_drivers(days=5), initial_ensemble(spec, 3), member_params(spec, 3)


def worst_difference(X, reference):
    return float(np.max(np.abs(X - reference) / (np.abs(reference) + FLOOR_UGL)))


@pytest.mark.slow
def test_hourly_integrator_matches_solve_ivp_over_60_days_within_stated_tolerance(case):
    spec, drivers, E, params, save, reference = case
    X = integrate.simulate(E, spec, drivers, save[0], save, dt_d=1 / 24, params=params)
    assert worst_difference(X, reference) <= TOLERANCE_1H
    # the ensemble really moved: members and basins differ, so agreement is not trivial
    assert np.ptp(reference[-1], axis=0).max() > 1.0
    assert np.max(np.abs(reference[-1] - reference[0])) > 10.0


@pytest.mark.slow
def test_halving_the_step_reduces_the_difference_to_solve_ivp_at_second_order(case):
    spec, drivers, E, params, save, reference = case
    e1 = worst_difference(integrate.simulate(E, spec, drivers, save[0], save, dt_d=1 / 24, params=params), reference)
    e2 = worst_difference(integrate.simulate(E, spec, drivers, save[0], save, dt_d=1 / 48, params=params), reference)
    assert e1 / e2 >= 3.0


@pytest.mark.slow
def test_hourly_integrator_with_nitrogen_fixers_matches_solve_ivp_within_stated_tolerance(fixation_case):
    spec, drivers, E, params, save, reference = fixation_case
    X = integrate.simulate(E, spec, drivers, save[0], save, dt_d=1 / 24, params=params)
    assert worst_difference(X, reference) <= TOLERANCE_1H_WITH_FIXATION
    # the detrital pools took part: they hold a visible share of the phosphorus at the end
    assert np.all(StateLayout(spec).detrital_phosphorus(reference[-1]) > 0.5)
    # fixation really happened: total N of the fixers' run exceeds that of the same run without it
    plain = without_fixation(spec)
    Y = integrate.simulate(E, plain, drivers, save[0], save, dt_d=1 / 24, params=params)
    assert np.all(budget.total_mass(reference[-1], spec)[:, 0] > 1.05 * budget.total_mass(Y[-1], plain)[:, 0])


@pytest.mark.slow
def test_integrator_with_nitrogen_fixers_converges_at_second_order_below_quarter_hour_steps(fixation_case):
    spec, drivers, E, params, save, reference = fixation_case
    e1 = worst_difference(integrate.simulate(E, spec, drivers, save[0], save, dt_d=1 / 96, params=params), reference)
    e2 = worst_difference(integrate.simulate(E, spec, drivers, save[0], save, dt_d=1 / 192, params=params), reference)
    assert e1 / e2 >= 3.0


def test_tendency_is_vectorised_over_members(small_case):
    spec, drivers, E, params = small_case
    forcing = forcing_at(drivers, spec, [JUNE_FIRST_2026 + 3.5])
    together = model.tendency(E, spec, forcing, params)
    one_by_one = np.vstack([model.tendency(E[m:m + 1], spec, forcing, {k: v[m:m + 1] for k, v in params.items()})
                            for m in range(E.shape[0])])
    np.testing.assert_allclose(together, one_by_one, rtol=1e-14)


def test_advance_equals_last_saved_state_of_simulate(small_case):
    spec, drivers, E, params = small_case
    save = JUNE_FIRST_2026 + np.arange(0.0, 4.0)
    X = integrate.simulate(E, spec, drivers, save[0], save[:4], params=params)
    Y = integrate.advance(E, spec, drivers, save[0], save[3], params=params)
    np.testing.assert_allclose(X[0], E)
    np.testing.assert_allclose(X[-1], Y, rtol=1e-12)
