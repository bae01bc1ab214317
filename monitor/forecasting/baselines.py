"""The statistical baselines a cycle issues beside Bloomline's forecast (pure; runs in compute).

For every basin and chlorophyll quantity with an observed history, each
baseline of :mod:`assimilation.baselines` is run from the analysis time on
the daily series up to it. They are stored with the run, as issued, so that
verification scores Bloomline and the baselines on exactly the same days
and a later reading never changes a baseline forecast that was issued.
"""

from __future__ import annotations

import numpy as np

from assimilation import baselines
from monitor.forecasting.history import OBSERVED_BY, REGRESSOR, ObservedHistory, Series

#: Baseline forecasters in the order they are stored and shown.
BASELINES = ("persistence", "persistence_ensemble", "climatology", "statistical")


def _on_grid(series: Series, grid_d: np.ndarray) -> np.ndarray:
    """``series`` on the daily ``grid_d`` (NaN where a day has no value)."""
    out = np.full(grid_d.size, np.nan)
    pos = np.rint(series.days_d - grid_d[0]).astype(int)
    ok = (pos >= 0) & (pos < grid_d.size) & (np.abs(series.days_d - grid_d[0] - pos) < 1e-6)
    out[pos[ok]] = series.values[ok]
    return out


def series_forecasts(chl: Series, temperature: Series | None, origin_d: float,
                     horizon: int) -> dict[str, np.ndarray | None]:
    """Each baseline's members (M, horizon) [µg/L] from ``chl`` at or before ``origin_d``; None where
    a baseline has no forecast (no value before the origin; no earlier year for the climatology)."""
    before = chl.days_d <= origin_d + 1e-6
    if not np.any(np.isfinite(chl.values[before])):
        return dict.fromkeys(BASELINES)
    grid = np.arange(origin_d - np.rint(origin_d - chl.days_d[before][0]), origin_d + 0.5, 1.0)
    values = _on_grid(chl, grid)
    temp = _on_grid(temperature, grid) if temperature is not None else None
    if temp is not None and not np.any(np.isfinite(temp)):
        temp = None
    climatology = baselines.climatology(grid, values, origin_d, horizon).members_ugL
    return {
        "persistence": baselines.persistence(grid, values, origin_d, horizon).members_ugL,
        "persistence_ensemble": baselines.persistence_ensemble(grid, values, origin_d, horizon).members_ugL,
        "climatology": None if np.all(np.isnan(climatology)) else climatology,
        "statistical": baselines.ar_average_forecast(grid, values, origin_d, horizon, temperature_C=temp).members_ugL,
    }


def baseline_members(history: ObservedHistory, basin_ids: tuple[str, ...], origin_d: float, horizon: int):
    """(basin, quantity, forecaster, observed variable, members (horizon + 1, M)) of every baseline.

    Day 0 (the analysis time) is not forecast by a baseline and holds NaN, so
    the arrays line up with Bloomline's member daily means.
    """
    for basin in basin_ids:
        temperature = history.get(basin, REGRESSOR)
        for quantity in OBSERVED_BY:
            chl = history.get(basin, quantity)
            if chl is None:
                continue
            for name, members in series_forecasts(chl, temperature, origin_d, horizon).items():
                if members is None:
                    continue
                full = np.vstack([np.full((1, members.shape[0]), np.nan), members.T])
                yield basin, quantity, name, chl.variable, full
