"""The Lorenz-96 model used by the filter checks (Lorenz 1996; Lorenz and Emanuel 1998)."""
import lorenz96
import numpy as np
from scipy.integrate import solve_ivp


def test_uniform_state_at_the_forcing_is_a_fixed_point():
    # X_i = F for all i is the steady solution of dX_i/dt = (X_{i+1} - X_{i-2}) X_{i-1} - X_i + F
    # (Lorenz 1996).
    X = np.full(40, 8.0)
    np.testing.assert_allclose(lorenz96.tendency(X), 0.0, atol=1e-12)


def test_tendency_matches_the_published_equation_index_by_index():
    rng = np.random.default_rng(0)
    X = rng.standard_normal(40) * 3
    n = X.size
    expected = np.array([(X[(i + 1) % n] - X[i - 2]) * X[i - 1] - X[i] + 8.0 for i in range(n)])
    np.testing.assert_allclose(lorenz96.tendency(X), expected, rtol=1e-13)


def test_advection_conserves_energy():
    # The quadratic terms conserve sum X_i²/2 (Lorenz 1996; Lorenz and Emanuel
    # 1998, J. Atmos. Sci. 55:399): X · (tendency + X - F) = 0.
    rng = np.random.default_rng(1)
    X = rng.standard_normal((5, 40)) * 4
    adv = lorenz96.tendency(X) + X - 8.0
    np.testing.assert_allclose(np.sum(X * adv, axis=-1), 0.0, atol=1e-10)


def test_rk4_steps_agree_with_solve_ivp():
    # scipy's DOP853 at rtol 1e-12 as the reference, from a state on the
    # attractor, over one model time unit (20 steps of 0.05). RK4's global
    # error is of order dt⁴ (common practice): about 0.02 here after chaotic
    # growth, and halving the step cuts it by about 2⁴ = 16.
    rng = np.random.default_rng(2)
    X0 = lorenz96.integrate(8.0 + rng.standard_normal(40), 500)
    ref = solve_ivp(lambda t, x: lorenz96.tendency(x), (0.0, 1.0), X0, method="DOP853",
                    rtol=1e-12, atol=1e-12).y[:, -1]
    coarse = np.max(np.abs(lorenz96.integrate(X0, 20, dt=0.05) - ref))
    fine = np.max(np.abs(lorenz96.integrate(X0, 40, dt=0.025) - ref))
    assert coarse < 0.05
    assert 10.0 < coarse / fine < 25.0


def test_members_advance_independently():
    rng = np.random.default_rng(3)
    E = 8.0 + rng.standard_normal((4, 40))
    together = lorenz96.integrate(E, 10)
    alone = np.array([lorenz96.integrate(e, 10) for e in E])
    np.testing.assert_array_equal(together, alone)
