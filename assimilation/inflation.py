"""Covariance inflation and a guard against ensemble collapse.

All functions work on ensembles of shape (members, n) in the analysis space
(log space for concentrations and positive parameters in Bloomline).

References
----------
[1] Anderson, J. L. and Anderson, S. L. (1999). A Monte Carlo implementation of
    the nonlinear filtering problem to produce ensemble assimilations and
    forecasts. Mon. Wea. Rev. 127:2741–2758 (multiplicative inflation).
[2] Whitaker, J. S. and Hamill, T. M. (2012). Evaluating methods to account for
    system errors in ensemble data assimilation. Mon. Wea. Rev. 140:3078–3089
    (relaxation to prior spread, RTPS).
"""
from __future__ import annotations

import numpy as np


def inflate_multiplicative(E: np.ndarray, factor: float, columns=None) -> np.ndarray:
    """Scale the anomalies about the ensemble mean by ``factor`` [-].

    E (M, n). factor multiplies the spread (standard deviation), so the
    covariance grows by factor**2 (Anderson and Anderson 1999, Mon. Wea.
    Rev. 127:2741). columns: optional index or mask of the columns to
    inflate; the others are returned unchanged. Returns a new array.
    """
    if not factor > 0:
        raise ValueError(f"inflation factor must be > 0, got {factor!r}")
    out = np.array(E, dtype=float, copy=True)
    cols = slice(None) if columns is None else columns
    part = out[:, cols]
    mean = part.mean(axis=0)
    out[:, cols] = mean + factor * (part - mean)
    return out


def relax_to_prior_spread(E_prior: np.ndarray, E_post: np.ndarray, alpha: float) -> np.ndarray:
    """Relaxation to prior spread (RTPS): Whitaker and Hamill (2012), eq. (4).

    Each variable's analysis anomalies are rescaled so that its spread
    becomes sigma_a + alpha * (sigma_b - sigma_a), alpha in [0, 1]
    (0 = no relaxation, 1 = prior spread kept). Variables whose analysis
    spread is zero are left unchanged. Returns a new (M, n) array.
    """
    if not 0.0 <= alpha <= 1.0:
        raise ValueError(f"relaxation alpha must be in [0, 1], got {alpha!r}")
    sd_b = E_prior.std(axis=0, ddof=1)
    mean_a = E_post.mean(axis=0)
    X_a = E_post - mean_a
    sd_a = X_a.std(axis=0, ddof=1)
    scale = np.ones_like(sd_a)
    ok = sd_a > 0
    scale[ok] = 1.0 + alpha * (sd_b[ok] - sd_a[ok]) / sd_a[ok]
    return mean_a + X_a * scale


def floor_spread(E: np.ndarray, sd_floor: float, columns=None) -> np.ndarray:
    """Raise the spread of the chosen columns to at least ``sd_floor``.

    A guard against collapse of augmented parameters (common practice in
    state-augmentation filters; cf. Aksoy, Zhang and Nielsen-Gammon 2006,
    Mon. Wea. Rev. 134:2951, who keep a minimum parameter spread). The
    anomalies of a column whose standard deviation is below the floor are
    scaled up to it; zero anomalies stay zero. Returns a new array.
    """
    out = np.array(E, dtype=float, copy=True)
    cols = np.arange(out.shape[1])[slice(None) if columns is None else columns]
    part = out[:, cols]
    mean = part.mean(axis=0)
    X = part - mean
    sd = X.std(axis=0, ddof=1)
    low = (sd < sd_floor) & (sd > 0)
    out[:, cols[low]] = mean[low] + X[:, low] * (sd_floor / sd[low])
    return out
