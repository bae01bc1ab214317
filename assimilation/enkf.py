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
    c = cho_factor(S, lower=True, check_finite=False)
    return E + cho_solve(c, innov.T, check_finite=False).T @ Pxy.T


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
    # A_u = (M-1) I + Y diag(w_u) Y^T for each distinct localization row u.
    Yw = Y[None, :, :] * weights[:, None, :]                  # (U, M, p)
    A = Yw @ Y.T                                              # (U, M, M)
    A[:, np.arange(M), np.arange(M)] += M - 1
    lam, V = np.linalg.eigh(A)
    lam = np.maximum(lam, 1e-12 * (M - 1))
    # Mean weights Pa~ Y diag(w) d and the symmetric square root sqrt((M-1) Pa~).
    b = Yw @ d                                                # (U, M)
    wbar = (V @ ((np.swapaxes(V, 1, 2) @ b[:, :, None])[:, :, 0] / lam)[:, :, None])[:, :, 0]
    W = (V * np.sqrt((M - 1) / lam)[:, None, :]) @ np.swapaxes(V, 1, 2)
    T = W + wbar[:, :, None]                                  # (U, M, M): column k -> member k
    if T.shape[0] == 1:
        return mean_x + T[0].T @ X
    return mean_x + np.einsum("jmk,mj->kj", T[domain], X)
