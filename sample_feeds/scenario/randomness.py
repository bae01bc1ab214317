"""Seeded random streams and the AR(1) series the scenario's noise is built from."""
from __future__ import annotations

import numpy as np


def child_rngs(seed: int, n: int) -> list[np.random.Generator]:
    """Independent generators per component, so one component's draws never shift another's."""
    return [np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(n)]


def ar1(rng: np.random.Generator, n: int, phi: float, sigma: float) -> np.ndarray:
    """Stationary AR(1) series of length n with lag-1 coefficient phi and marginal sd sigma.

    x[k] = phi x[k-1] + eps[k], eps ~ N(0, sigma² (1 - phi²)); units are those of sigma.
    """
    x = np.empty(n)
    x[0] = rng.normal(0.0, sigma)
    eps = rng.normal(0.0, sigma * np.sqrt(1.0 - phi * phi), n)
    for k in range(1, n):
        x[k] = phi * x[k - 1] + eps[k]
    return x
