"""Both analysis forms on the standard Lorenz-96 filter benchmark.

Setting (Sakov and Oke 2008, Tellus A 60:361):
40 variables, F = 8, RK4 with dt = 0.05, every variable observed every step
with unit error variance, no model noise; score = time-mean RMSE of the
analysis mean after spin-up. Published scores (Sakov and Oke 2008, Table 1,
as reproduced in a data-assimilation research library): stochastic EnKF with
40 members 0.22; ETKF with 20 members 0.20 (Bocquet 2015); localized LETKF
with 7 members 0.22 (Bocquet 2011); a converged EnKF ≈ 0.20 (common result);
climatology ≈ 3.6. With 20 members, Gaspari–Cohn localization and
multiplicative inflation, a well-tuned filter must be below 0.30
(stochastic) and 0.25 (square root) over a long run.
"""
import lorenz96
import numpy as np
import pytest

from assimilation import enkf, inflation, localization

N_VARIABLES = 40
MEMBERS = 20


def _time_mean_rmse(method, inflation_factor, half_width, steps=4000, spin_up=1000, seed=0):
    rng = np.random.default_rng(seed)
    x = lorenz96.integrate(8.0 + rng.standard_normal(N_VARIABLES), 1000)
    E = x + rng.standard_normal((MEMBERS, N_VARIABLES))
    rho = localization.gaspari_cohn(localization.periodic_distance(N_VARIABLES), half_width)
    R = np.ones(N_VARIABLES)
    errors = []
    for k in range(steps):
        x = lorenz96.step(x)
        E = lorenz96.step(E)
        y = x + rng.standard_normal(N_VARIABLES)
        E = inflation.inflate_multiplicative(E, inflation_factor)
        E = enkf.analysis(E, E, y, R, method=method, rng=rng, rho=rho, rho_obs=rho)
        if k >= spin_up:
            errors.append(np.sqrt(np.mean((E.mean(axis=0) - x) ** 2)))
    return float(np.mean(errors))


@pytest.mark.slow
def test_stochastic_form_reaches_published_lorenz96_skill():
    rmse = _time_mean_rmse("stochastic", inflation_factor=1.03, half_width=7.0)
    # Published: 0.22 with 40 members (Sakov and Oke 2008); the bar for 20 is 0.30.
    assert rmse < 0.30
    assert rmse > 0.15  # a filter cannot beat the converged-EnKF figure by this much


@pytest.mark.slow
def test_square_root_form_reaches_published_lorenz96_skill():
    rmse = _time_mean_rmse("sqrt", inflation_factor=1.02, half_width=8.0)
    # Published: ETKF N = 20 → 0.20 (Bocquet 2015); converged EnKF ≈ 0.20.
    assert rmse < 0.25
    assert rmse > 0.15


def test_filter_beats_climatology_quickly():
    # A short run, both forms: far below the climatological RMSE ≈ 3.6
    # (Sakov and Oke 2008) and below the observation error of 1.
    for method in ("sqrt", "stochastic"):
        assert _time_mean_rmse(method, 1.03, 6.0, steps=300, spin_up=100, seed=4) < 0.5
