"""The Lorenz-96 model, vectorised over ensemble members.

dX_i/dt = (X_{i+1} - X_{i-2}) X_{i-1} - X_i + F, i periodic
(Lorenz 1996, Predictability: a problem partly solved, Proc. ECMWF Seminar
on Predictability, vol. 1, 1–18; Lorenz and Emanuel 1998, J. Atmos. Sci.
55:399). A helper of Bloomline's filter tests (imported like filter_twin.py):
the standard testbed for ensemble filters, with 40 variables, F = 8 and RK4
steps of 0.05.
"""
from __future__ import annotations

import numpy as np

FORCING = 8.0
DT = 0.05


def tendency(X: np.ndarray, forcing: float = FORCING) -> np.ndarray:
    """dX/dt for X of shape (..., n) [model units per model time]."""
    return (np.roll(X, -1, axis=-1) - np.roll(X, 2, axis=-1)) * np.roll(X, 1, axis=-1) - X + forcing


def step(X: np.ndarray, dt: float = DT, forcing: float = FORCING) -> np.ndarray:
    """One classical fourth-order Runge–Kutta step of length dt."""
    k1 = tendency(X, forcing)
    k2 = tendency(X + 0.5 * dt * k1, forcing)
    k3 = tendency(X + 0.5 * dt * k2, forcing)
    k4 = tendency(X + dt * k3, forcing)
    return X + dt / 6.0 * (k1 + 2.0 * k2 + 2.0 * k3 + k4)


def integrate(X: np.ndarray, n_steps: int, dt: float = DT, forcing: float = FORCING) -> np.ndarray:
    """Advance X (..., n) by n_steps RK4 steps; returns the final state."""
    X = np.asarray(X, dtype=float)
    for _ in range(int(n_steps)):
        X = step(X, dt, forcing)
    return X
