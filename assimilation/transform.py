"""Transforms between physical values and the analysis space.

Concentrations and positive parameters are analysed in log space, which
keeps them positive and makes their multiplicative errors additive
(Gaussian anamorphosis in its simplest form; Bertino, Evensen and
Wackernagel 2003, Int. Stat. Rev. 71:223).
"""
from __future__ import annotations

import numpy as np


def to_log(values: np.ndarray, floor: float) -> np.ndarray:
    """Natural log of ``max(values, floor)``; values and floor in one unit [e.g. µg/L]."""
    if not floor > 0:
        raise ValueError(f"log floor must be > 0, got {floor!r}")
    return np.log(np.maximum(values, floor))


def from_log(z: np.ndarray) -> np.ndarray:
    """Inverse of :func:`to_log` (values above the floor come back exactly up to round-off)."""
    return np.exp(z)
