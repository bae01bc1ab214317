"""Transport of dissolved and suspended matter through a network of basins.

Each basin is a well-mixed box of constant volume (a continuously stirred
tank reactor); its outflow equals what enters it and carries its
concentration downstream. For one basin with a constant inflow this is the
chemostat of Monod (1950) and Novick & Szilard (1950), dilution rate
D = Q / V. For the network the transport is dC/dt = L(t)·C + s(t) with L a
Metzler matrix (non-negative off the diagonal); the integrator treats each
flow as one process (:mod:`assimilation.integrate`).

[1] Chapra, S.C. (1997) Surface Water-Quality Modeling. McGraw-Hill, ch. 6
    (systems of completely mixed reactors).
"""
from __future__ import annotations

import numpy as np

SECONDS_PER_DAY = 86400.0


def inflow_matrix(network) -> np.ndarray:
    """(B, I) 0/1 matrix: external inflow i enters basin b."""
    S = np.zeros((network.n_basins, network.n_inflows))
    for i, b in enumerate(network.inflow_basin):
        S[b, i] = 1.0
    return S


def connection_matrix(network) -> np.ndarray:
    """(B, B) 0/1 matrix C with C[j, k] = 1 when basin k flows into basin j."""
    B = network.n_basins
    C = np.zeros((B, B))
    for k, j in enumerate(network.downstream):
        if j >= 0:
            C[j, k] = 1.0
    return C


def outflow_operator(network) -> np.ndarray:
    """(B, I) matrix R with basin outflows Q_out = R · q_inflows. [-]

    Constant volume: Q_out = S·q + C·Q_out, so R = (I − C)⁻¹ S; I − C is
    invertible because the network is acyclic (C is nilpotent).
    """
    B = network.n_basins
    return np.linalg.solve(np.eye(B) - connection_matrix(network), inflow_matrix(network))


def basin_outflows(network, inflow_m3_s) -> np.ndarray:
    """Outflow of each basin [m³/s], shape (..., B), from inflows (..., I) [m³/s]."""
    return np.asarray(inflow_m3_s) @ outflow_operator(network).T


def transport_matrix(spec, inflow_m3_s) -> np.ndarray:
    """Transport operator L (..., B, B) [1/d] of dC/dt = L·C + s.

    L[b, b] = −Q_out,b / V_b (dilution rate D), L[j, k] = Q_out,k / V_j when
    basin k flows into basin j (Chapra 1997 [1], ch. 6).
    inflow_m3_s (..., I) [m³/s].
    """
    network = spec.network
    volume = np.array([b.volume_m3 for b in spec.basins])
    Q = basin_outflows(network, inflow_m3_s) * SECONDS_PER_DAY            # (..., B) m³/d
    C = connection_matrix(network)
    L = C * Q[..., None, :] / volume[:, None]
    idx = np.arange(network.n_basins)
    L[..., idx, idx] = -Q / volume
    return L


def inflow_source(spec, inflow_m3_s, inflow_concentration) -> np.ndarray:
    """Source s (..., B, S) [µg/L/d] of external inflows for S transported species.

    inflow_m3_s (..., I) [m³/s], inflow_concentration (..., I, S) [µg/L]:
    s_b = Σ_i q_i·c_i / V_b over the inflows entering basin b.
    """
    volume = np.array([b.volume_m3 for b in spec.basins])
    load = np.asarray(inflow_m3_s)[..., :, None] * np.asarray(inflow_concentration) * SECONDS_PER_DAY
    return np.einsum("bi,...is->...bs", inflow_matrix(spec.network), load) / volume[:, None]
