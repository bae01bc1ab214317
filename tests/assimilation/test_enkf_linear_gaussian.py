"""The ensemble analysis against exact and ensemble reference filters on a linear-Gaussian problem.

References: filterpy's ``KalmanFilter`` (Labbe, filterpy, PyPI) is the exact
solution of a linear-Gaussian problem (Kalman 1960, J. Basic Eng. 82:35);
filterpy's ``EnsembleKalmanFilter`` implements the perturbed-observation
EnKF (Evensen 2003, Ocean Dyn. 53:343).
"""
import numpy as np
import pytest
from filterpy.kalman import EnsembleKalmanFilter, KalmanFilter
from scipy import stats

from assimilation import enkf

F = np.array([[0.9, 0.2, 0.0], [-0.1, 0.8, 0.1], [0.0, 0.3, 0.7]])
Q = np.diag([0.2, 0.1, 0.3])
H = np.array([[1.0, 0.0, 0.0], [0.0, 0.0, 1.0]])
R = np.array([0.5, 0.3])
M0 = np.array([1.0, -1.0, 0.5])
P0 = np.diag([1.0, 2.0, 0.5])
CYCLES = 6


def _observations(seed=123):
    rng = np.random.default_rng(seed)
    x = rng.multivariate_normal(M0, P0)
    ys = []
    for _ in range(CYCLES):
        x = F @ x + rng.multivariate_normal(np.zeros(3), Q)
        ys.append(H @ x + np.sqrt(R) * rng.standard_normal(2))
    return ys


def _exact(ys):
    kf = KalmanFilter(dim_x=3, dim_z=2)
    kf.x = M0.copy()
    kf.P = P0.copy()
    kf.F, kf.H, kf.Q, kf.R = F, H, Q, np.diag(R)
    for y in ys:
        kf.predict()
        kf.update(y)
    return kf.x.ravel(), kf.P


def _bloomline(ys, method, members, seed, center=True):
    rng = np.random.default_rng(seed)
    E = rng.multivariate_normal(M0, P0, size=members)
    for y in ys:
        E = E @ F.T + rng.multivariate_normal(np.zeros(3), Q, size=members)
        E = enkf.analysis(E, E @ H.T, y, R, method=method, rng=rng, center_perturbations=center)
    return E


@pytest.mark.parametrize("method", ["stochastic", "sqrt"])
def test_analysis_matches_kalman_filter_for_large_ensemble(method):
    ys = _observations()
    x_kf, P_kf = _exact(ys)
    members = 20_000
    E = _bloomline(ys, method, members, seed=5)
    # Monte-Carlo standard errors of a sample mean and a sample covariance of
    # a Gaussian (common practice): sqrt(P_ii / M) and sqrt((P_ii P_jj + P_ij²) / M).
    se_mean = np.sqrt(np.diag(P_kf) / members)
    se_cov = np.sqrt((np.outer(np.diag(P_kf), np.diag(P_kf)) + P_kf**2) / members)
    assert np.all(np.abs(E.mean(axis=0) - x_kf) < 5 * se_mean)
    assert np.all(np.abs(np.cov(E.T) - P_kf) < 5 * se_cov)


def test_small_ensemble_without_sampling_error_is_exact_kalman_update():
    # One analysis from an ensemble whose sample mean and covariance are known:
    # both forms reproduce the Kalman mean; the square-root form also the
    # Kalman covariance to round-off (Bishop et al. 2001; Kalman 1960).
    rng = np.random.default_rng(0)
    E = rng.standard_normal((30, 3)) @ np.linalg.cholesky(P0).T + M0
    xb, Pb = E.mean(axis=0), np.cov(E.T)
    y = np.array([0.3, 1.2])
    K = Pb @ H.T @ np.linalg.inv(H @ Pb @ H.T + np.diag(R))
    xa = xb + K @ (y - H @ xb)
    Pa = (np.eye(3) - K @ H) @ Pb
    Ea = enkf.analysis(E, E @ H.T, y, R, method="sqrt")
    np.testing.assert_allclose(Ea.mean(axis=0), xa, atol=1e-12)
    np.testing.assert_allclose(np.cov(Ea.T), Pa, atol=1e-12)
    Es = enkf.analysis(E, E @ H.T, y, R, method="stochastic", rng=rng)
    np.testing.assert_allclose(Es.mean(axis=0), xa, atol=1e-12)  # centred perturbations


@pytest.fixture
def global_numpy_seed():
    """filterpy's ensemble filter draws from numpy's global generator; seed it and restore it."""
    state = np.random.get_state()
    np.random.seed(2024)
    yield
    np.random.set_state(state)


def _filterpy_replicate(ys, members):
    ref = EnsembleKalmanFilter(x=M0.copy(), P=P0.copy(), dim_z=2, dt=1.0, N=members,
                               hx=lambda x: H @ x, fx=lambda x, dt: F @ x)
    ref.Q = Q.copy()
    ref.R = np.diag(R)
    for y in ys:
        ref.predict()
        ref.update(y)
    return ref.sigmas


def _summary(E):
    """Ensemble mean of each variable and total variance of one replicate."""
    return np.r_[E.mean(axis=0), np.trace(np.cov(E.T))]


def test_stochastic_form_agrees_in_distribution_with_filterpy_ensemble_filter(global_numpy_seed):
    # Both are the perturbed-observation EnKF (Burgers et al. 1998; filterpy's
    # EnsembleKalmanFilter), so over many independent replicates of a small
    # ensemble the analysis mean and spread must have the same distribution.
    ys = _observations()
    members, replicates = 15, 300
    rng = np.random.default_rng(17)
    ours = np.array([_summary(_bloomline(ys, "stochastic", members, seed=int(s), center=False))
                     for s in rng.integers(0, 2**31, replicates)])
    ref = np.array([_summary(_filterpy_replicate(ys, members)) for _ in range(replicates)])
    # Two-sample Kolmogorov–Smirnov test per summary (scipy.stats.ks_2samp).
    for j in range(ours.shape[1]):
        assert stats.ks_2samp(ours[:, j], ref[:, j]).pvalue > 1e-3, j


def test_square_root_form_is_no_farther_from_the_kalman_filter_than_filterpy(global_numpy_seed):
    # The deterministic form has no observation-perturbation noise, so over
    # replicates its mean lies at least as close to the exact Kalman mean
    # (filterpy KalmanFilter) as filterpy's stochastic EnsembleKalmanFilter
    # does (Whitaker and Hamill 2002, Mon. Wea. Rev. 130:1913).
    ys = _observations()
    x_kf, _ = _exact(ys)
    members, replicates = 15, 200
    rng = np.random.default_rng(19)
    ours = np.array([_bloomline(ys, "sqrt", members, seed=int(s)).mean(axis=0)
                     for s in rng.integers(0, 2**31, replicates)])
    ref = np.array([_filterpy_replicate(ys, members).mean(axis=0) for _ in range(replicates)])
    err_ours = np.sqrt(np.mean((ours - x_kf) ** 2))
    err_ref = np.sqrt(np.mean((ref - x_kf) ** 2))
    assert err_ours < err_ref


def test_analysis_rejects_non_positive_error_variance():
    E = np.zeros((4, 2))
    with pytest.raises(ValueError, match="R must be > 0"):
        enkf.analysis(E, E[:, :1], np.zeros(1), np.zeros(1))


def test_stochastic_form_needs_a_generator():
    E = np.arange(8.0).reshape(4, 2)
    with pytest.raises(ValueError, match="pass rng"):
        enkf.analysis(E, E[:, :1], np.zeros(1), np.ones(1), method="stochastic")


def test_localization_weight_zero_leaves_a_variable_unchanged():
    rng = np.random.default_rng(3)
    E = rng.standard_normal((25, 3))
    rho = np.array([[1.0], [0.5], [0.0]])
    rho_obs = np.ones((1, 1))
    for method in ("sqrt", "stochastic"):
        Ea = enkf.analysis(E, E[:, :1], np.array([2.0]), np.array([0.5]), method=method, rng=rng,
                           rho=rho, rho_obs=rho_obs)
        np.testing.assert_allclose(Ea[:, 2], E[:, 2], atol=1e-12)
        assert not np.allclose(Ea[:, 0], E[:, 0])
