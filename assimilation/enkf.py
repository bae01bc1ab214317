"""Ensemble Kalman filter analysis: one interface, two forms.

Glossary (DEVELOPERS.md): ``E`` ensemble (M members, n variables), ``X``
anomalies, ``HE`` predicted observations (M, p), ``Y`` their anomalies,
``y`` observations (p,), ``R`` observation error variances (p,), ``K`` gain,
``rho`` localization weights.

Forms
-----
``"stochastic"``
    Perturbed-observation EnKF (Burgers, van Leeuwen and Evensen 1998, Mon.
    Wea. Rev. 126:1719), localized by a Schur product on the gain's
    covariances (Houtekamer and Mitchell 2001, Mon. Wea. Rev. 129:123).
``"sqrt"``
    Deterministic square-root form: the ensemble transform Kalman filter
    (Bishop, Etherton and Majumdar 2001, Mon. Wea. Rev. 129:420) in the
    symmetric-square-root formulation of Hunt, Kostelich and Szunyogh (2007,
    Physica D 230:112); with localization it is their local ETKF with
    observation-error localization (each variable is analysed with R^-1
    weighted by its row of ``rho``). Variables with the same row of ``rho``
    share one transform, so a few basins cost a few small eigen-problems.

Both forms are vectorised over members; the observation operator is applied
by the caller (``HE``), so nonlinear operators are handled the usual
ensemble way.
"""
from __future__ import annotations

import numpy as np
from scipy.linalg import cho_factor, cho_solve

METHODS = ("stochastic", "sqrt")


def _check(E, HE, y, R):
    E = np.asarray(E, dtype=float)
    HE = np.asarray(HE, dtype=float)
    y = np.asarray(y, dtype=float).ravel()
    R = np.asarray(R, dtype=float).ravel()
    if E.ndim != 2 or HE.ndim != 2 or HE.shape[0] != E.shape[0]:
        raise ValueError(f"expected E (M, n) and HE (M, p) with the same M, got {E.shape} and {HE.shape}")
    if E.shape[0] < 2:
        raise ValueError(f"an ensemble needs at least 2 members, got {E.shape[0]}")
    p = HE.shape[1]
    if y.shape != (p,) or R.shape != (p,):
        raise ValueError(f"expected y and R of shape ({p},), got {y.shape} and {R.shape}")
    if np.any(~(R > 0)):
        raise ValueError("observation error variances R must be > 0")
    return E, HE, y, R


def analysis(E, HE, y, R, *, method: str = "sqrt", rng: np.random.Generator | None = None,
             rho: np.ndarray | None = None, rho_obs: np.ndarray | None = None,
             center_perturbations: bool = True) -> np.ndarray:
    """Analysis ensemble (M, n) from the prior ``E`` and predicted observations ``HE``.

    E (M, n) prior in the analysis space; HE (M, p) the observation operator
    applied to each member [observation units]; y (p,) observations; R (p,)
    error variances [observation units squared] (independent errors).
    method: ``"sqrt"`` (deterministic) or ``"stochastic"`` (perturbed
    observations; needs ``rng``). rho (n, p): state–observation localization
    weights in [0, 1]; rho_obs (p, p): observation–observation weights, used
    by the stochastic form (required there when rho is given).
    center_perturbations: subtract the ensemble mean of the observation
    perturbations so the mean update equals the Kalman update with the
    ensemble covariance (common practice; Pham 2001, Mon. Wea. Rev. 129:1194).
    """
    E, HE, y, R = _check(E, HE, y, R)
    if method not in METHODS:
        raise ValueError(f"method must be one of {METHODS}, got {method!r}")
    M, n = E.shape
    p = HE.shape[1]
    if rho is not None:
        rho = np.asarray(rho, dtype=float)
        if rho.shape != (n, p):
            raise ValueError(f"expected rho of shape ({n}, {p}), got {rho.shape}")
    if p == 0:
        return E.copy()
    if method == "stochastic":
        if rng is None:
            raise ValueError("the stochastic form draws observation perturbations: pass rng")
        if rho is not None and rho_obs is None:
            raise ValueError("the stochastic form with rho also needs rho_obs (p, p)")
        return _stochastic(E, HE, y, R, rng, rho, rho_obs, center_perturbations)
    return _sqrt(E, HE, y, R, rho)


def _stochastic(E, HE, y, R, rng, rho, rho_obs, center):
    M = E.shape[0]
    X = (E - E.mean(axis=0)) / np.sqrt(M - 1)
    Y = (HE - HE.mean(axis=0)) / np.sqrt(M - 1)
    Pxy = X.T @ Y
    Pyy = Y.T @ Y
    if rho is not None:
        Pxy = Pxy * rho
        Pyy = Pyy * np.asarray(rho_obs, dtype=float)
    S = Pyy + np.diag(R)
    eps = rng.standard_normal(HE.shape)
    if center:
        eps -= eps.mean(axis=0)
    D = y + eps * np.sqrt(R)
    innov = D - HE
    try:
        gain_innov = cho_solve(cho_factor(S, lower=True, check_finite=False), innov.T, check_finite=False)
    except np.linalg.LinAlgError:
        # A tapered Pyy need not be positive definite when the distances are
        # not Euclidean (hops along a network); fall back to a general solve.
        gain_innov = np.linalg.solve(S, innov.T)
    return E + gain_innov.T @ Pxy.T


def _sqrt(E, HE, y, R, rho):
    M, n = E.shape
    mean_x = E.mean(axis=0)
    X = E - mean_x
    mean_y = HE.mean(axis=0)
    Y = HE - mean_y
    d = y - mean_y
    if rho is None:
        weights = (1.0 / R)[None, :]
        domain = np.zeros(n, dtype=int)
    else:
        weights, domain = np.unique(rho, axis=0, return_inverse=True)
        domain = domain.ravel()
        weights = weights / R
    # Scaled observed anomalies of each distinct localization row u:
    # S_u = Y diag(w_u)^(1/2) / sqrt(M-1), so that the ensemble-space
    # precision is (M-1) (I + S_u S_u^T) (Hunt et al. 2007, eq. 21).
    sw = np.sqrt(weights)                                     # (U, p)
    S = Y[None, :, :] * (sw / np.sqrt(M - 1))[:, None, :]     # (U, M, p)
    dw = sw * d                                               # (U, p): R^(-1/2)-scaled innovations
    if M <= HE.shape[1]:
        # Ensemble space: eigen-decomposition of I + S S^T (U, M, M).
        lam, V = np.linalg.eigh(S @ np.swapaxes(S, 1, 2) + np.eye(M))
        Vt = np.swapaxes(V, 1, 2)
        wbar = (V @ ((Vt @ (S @ dw[:, :, None]))[:, :, 0] / lam)[:, :, None])[:, :, 0] / np.sqrt(M - 1)
        T = (V / np.sqrt(lam)[:, None, :]) @ Vt + wbar[:, :, None]   # column k -> member k
        if rho is None:
            return mean_x + T[0].T @ X
        return mean_x + np.einsum("jmk,mj->kj", T[domain], X)
    # Observation space, p < M. Thin SVD S_u = L diag(s) V^T with r = p columns:
    # (I + S S^T)^(-1/2) = I + L diag((1 + s²)^(-1/2) − 1) L^T and
    # (I + S S^T)^(-1) S = L diag(s / (1 + s²)) V^T, so the cost is
    # O(M p²) per row instead of an M × M eigen-problem.
    L, s, Vt = np.linalg.svd(S, full_matrices=False)
    coef = (s / (1.0 + s**2)) * (Vt @ dw[:, :, None])[:, :, 0]  # (U, r)
    wbar = (L @ coef[:, :, None])[:, :, 0] / np.sqrt(M - 1)   # (U, M)
    f = 1.0 / np.sqrt(1.0 + s**2) - 1.0                       # (U, r)
    if rho is None:
        L0 = L[0]
        return mean_x + wbar[0] @ X + X + L0 @ (f[0][:, None] * (L0.T @ X))
    # Per variable j in domain u: x_a = mean + X_j (wbar_u + 1) + L_u f_u L_u^T X_j.
    Lj = L[domain]                                            # (n, M, r)
    proj = np.einsum("jmr,mj->jr", Lj, X) * f[domain]         # (n, r)
    return (mean_x + np.einsum("jm,mj->j", wbar[domain], X) + X
            + np.einsum("jmr,jr->mj", Lj, proj))
