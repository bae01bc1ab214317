"""Drivers interpolated to the model's times: the forcing of the tendency.

:func:`forcing_at` turns the hourly (or coarser) series of
:class:`assimilation.spec.Drivers` into a :class:`Forcing` at the times the
integrator needs, by linear interpolation in time; shortwave radiation
becomes surface PAR through the spec's ``par_fraction``.
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from assimilation.spec import NUTRIENT_SLOTS, Drivers, ModelSpec


@dataclass(frozen=True, eq=False)
class Forcing:
    """Drivers at K times: water_temperature_C (K, B) or (K, M, B) [°C], par_W_m2 (K, B)
    [W/m² PAR at the surface], inflow_m3_s (K, I) [m³/s] and
    inflow_concentration_ugL (K, I, 4 + G) [µg/L] (N, P, detrital N and P,
    chlorophyll per group; the drivers carry no detritus, so inflows bring
    none: organic nutrients of an inflow are not in its DIN and SRP)."""

    water_temperature_C: np.ndarray
    par_W_m2: np.ndarray
    inflow_m3_s: np.ndarray
    inflow_concentration_ugL: np.ndarray


def check_time_range(drivers: Drivers, t_first: float, t_last: float) -> None:
    """Raise ValueError unless [t_first, t_last] [epoch days] lies within the driver times."""
    t = drivers.time_d
    tol = 1e-9 * max(1.0, abs(t[-1]))
    if t_first < t[0] - tol or t_last > t[-1] + tol:
        raise ValueError(f"drivers cover epoch days {t[0]:.6f}..{t[-1]:.6f}, "
                         f"the model needs {t_first:.6f}..{t_last:.6f}")


def check_members(forcing: Forcing, n_members: int) -> None:
    """Raise ValueError unless a per-member water temperature (K, M, B) has ``n_members`` series."""
    temperature = forcing.water_temperature_C
    if temperature.ndim == 3 and temperature.shape[1] != n_members:
        raise ValueError(f"Drivers.water_temperature_C has one series for each of {temperature.shape[1]} members "
                         f"(shape (T, M, B)), but the ensemble has {n_members} members")


def _interpolate(time_d: np.ndarray, values: np.ndarray, times: np.ndarray) -> np.ndarray:
    """Linear interpolation of ``values`` (T, ...) at ``time_d`` (T,) to ``times`` (K,), held at the ends."""
    if time_d.size == 1:
        return np.broadcast_to(values[:1], (times.size,) + values.shape[1:]).copy()
    k = np.clip(np.searchsorted(time_d, times, side="right") - 1, 0, time_d.size - 2)
    w = np.clip((times - time_d[k]) / (time_d[k + 1] - time_d[k]), 0.0, 1.0)
    w = w.reshape((-1,) + (1,) * (values.ndim - 1))
    return (1.0 - w) * values[k] + w * values[k + 1]


def forcing_at(drivers: Drivers, spec: ModelSpec, times_d) -> Forcing:
    """Drivers interpolated linearly to ``times_d`` (K,) [epoch days]."""
    drivers.check_against(spec)
    times = np.atleast_1d(np.asarray(times_d, dtype=float))
    check_time_range(drivers, times.min(), times.max())
    t = drivers.time_d
    B, I, G = spec.n_basins, spec.n_inflows, spec.n_groups
    temperature = _interpolate(t, drivers.water_temperature_C, times)
    shortwave = _interpolate(t, drivers.shortwave_W_m2, times)
    if shortwave.ndim == 1:
        shortwave = np.repeat(shortwave[:, None], B, axis=1)
    inflow = _interpolate(t, drivers.inflow_m3_s, times)
    conc = np.zeros((times.size, I, NUTRIENT_SLOTS + G))
    conc[..., 0] = _interpolate(t, drivers.inflow_nitrogen_ugL, times)
    conc[..., 1] = _interpolate(t, drivers.inflow_phosphorus_ugL, times)
    if drivers.inflow_chlorophyll_ugL is not None:
        conc[..., NUTRIENT_SLOTS:] = _interpolate(t, drivers.inflow_chlorophyll_ugL, times)
    return Forcing(temperature, spec.par_fraction * shortwave, inflow, conc)


def member_drivers(scenarios: list[Drivers], n_members: int) -> Drivers:
    """One :class:`Drivers` for an ensemble of ``n_members`` spread over driver scenarios.

    Member m runs under scenario ``m % len(scenarios)``: its water
    temperature becomes that scenario's series, so the result has a
    per-member water temperature (T, M, B) [°C]; every other driver is the
    first scenario's (the scenarios differ in water temperature only, and
    must share its time axis).
    """
    if not scenarios:
        raise ValueError("member_drivers needs at least one driver scenario")
    base = scenarios[0]
    for d in scenarios[1:]:
        if d.time_d.shape != base.time_d.shape or not np.array_equal(d.time_d, base.time_d):
            raise ValueError("driver scenarios must share one time axis")
    member_scenario = np.arange(n_members) % len(scenarios)
    temps = np.stack([d.water_temperature_C for d in scenarios])          # (S, T, B)
    return dataclasses.replace(base, water_temperature_C=np.transpose(temps[member_scenario], (1, 0, 2)))
