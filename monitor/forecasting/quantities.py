"""The quantities a forecast run stores per basin and day, with their units.

The cycle (:mod:`monitor.forecasting.cycle`) computes exactly these, the
store's read queries (:mod:`monitor.store.status`) and the API offer them.
"""

from __future__ import annotations

import numpy as np

from assimilation.spec import ModelSpec, StateLayout

#: Forecast quantities, in the order they are computed and listed.
QUANTITIES = ("cyanobacteria_chlorophyll", "total_chlorophyll", "nitrogen", "phosphorus")

#: Unit of each quantity, in ASCII for CSV and JSON: chlorophyll-a of the cyanobacteria
#: group and of all groups; the model's dissolved inorganic nitrogen as N and soluble
#: reactive phosphorus as P (``assimilation.spec``).
UNITS = {"cyanobacteria_chlorophyll": "ug/L", "total_chlorophyll": "ug/L", "nitrogen": "ug N/L",
         "phosphorus": "ug P/L"}


def quantity_series(traj: np.ndarray, spec: ModelSpec) -> dict[str, np.ndarray]:
    """Each forecast quantity of model states ``traj`` (..., n_state) [µg/L], as (..., B)."""
    layout = StateLayout(spec)
    chl = layout.chlorophyll(traj)
    cyano = [g for g, grp in enumerate(spec.groups) if grp.is_cyanobacteria]
    return {
        "cyanobacteria_chlorophyll": chl[..., cyano].sum(axis=-1),
        "total_chlorophyll": chl.sum(axis=-1),
        "nitrogen": layout.nitrogen(traj),
        "phosphorus": layout.phosphorus(traj),
    }
