"""Ensemble forecast statistics: daily quantiles and alert-level exceedance probabilities.

The forecast is the analysis ensemble run forward through the model
(``assimilation.integrate.simulate``); the probability of reaching a level
on a day is the fraction of members whose value reaches it at any saved time
of that day (the ensemble's relative frequency, the usual estimator of an
event probability from an ensemble; Leutbecher & Palmer 2008, J. Comput.
Phys. 227:3515).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

QUANTILES = (0.05, 0.25, 0.5, 0.75, 0.95)


@dataclass(frozen=True)
class DailyForecast:
    """Daily forecast statistics of one quantity per basin.

    ``day_end_d`` (K+1,): epoch day at which each forecast day ends (index 0
    is the analysis time itself). ``mean`` (K+1, B), ``quantiles`` (Q, K+1, B)
    for ``QUANTILES``; ``exceedance`` (K+1, B, L): probability of reaching
    each threshold on that day [-]; ``members`` (K+1, M, B): each member's
    daily mean, kept so that forecasts can be scored as ensembles (CRPS,
    rank histograms).
    """

    day_end_d: np.ndarray
    mean: np.ndarray
    quantiles: np.ndarray
    exceedance: np.ndarray
    members: np.ndarray
    horizon_exceedance: np.ndarray | None = None
    """(B, L): probability of reaching each threshold on any day 1..K — the fraction of members
    that do (not the largest daily probability, which is only a lower bound of it)."""


def daily_statistics(times_d: np.ndarray, values: np.ndarray, t0_d: float, horizon_days: int,
                     thresholds: np.ndarray | tuple[float, ...] = ()) -> DailyForecast:
    """Summarise a forecast trajectory day by day.

    times_d (S,) [epoch days], saved times including ``t0_d``; values (S, M, B)
    of one quantity (e.g. cyanobacteria chlorophyll-a [µg/L]); thresholds (L,)
    in the same unit. Day 0 is the snapshot at ``t0_d``; day k ≥ 1 covers
    (t0 + k − 1, t0 + k]: its mean and quantiles are of the members' daily
    means, its exceedance counts members whose daily maximum reaches the
    threshold.
    """
    times_d = np.asarray(times_d, dtype=float)
    values = np.asarray(values, dtype=float)
    thr = np.asarray(thresholds, dtype=float).reshape(-1)
    if values.ndim != 3 or values.shape[0] != times_d.shape[0]:
        raise ValueError(f"values must be (times, members, basins) matching times_d {times_d.shape}; got {values.shape}")
    eps = 1e-9
    k0 = np.flatnonzero(np.abs(times_d - t0_d) < 1e-6)
    if k0.size == 0:
        raise ValueError(f"times_d must include the analysis time t0_d = {t0_d}")
    days = [values[k0[0]][None]]
    for k in range(1, horizon_days + 1):
        inside = (times_d > t0_d + k - 1 + eps) & (times_d <= t0_d + k + eps)
        if not inside.any():
            raise ValueError(f"no saved time inside forecast day {k}")
        days.append(values[inside])
    mean_per_member = np.stack([d.mean(axis=0) for d in days])   # (K+1, M, B)
    max_per_member = np.stack([d.max(axis=0) for d in days])     # (K+1, M, B)
    exceed = (max_per_member[..., None] >= thr).mean(axis=1)     # (K+1, B, L)
    return DailyForecast(
        day_end_d=t0_d + np.arange(horizon_days + 1, dtype=float),
        mean=mean_per_member.mean(axis=1),
        quantiles=np.quantile(mean_per_member, QUANTILES, axis=1),
        exceedance=exceed,
        members=mean_per_member,
        horizon_exceedance=(max_per_member[1:].max(axis=0)[..., None] >= thr).mean(axis=0),
    )


def member_statistics(day_end_d: np.ndarray, members: np.ndarray,
                      thresholds: np.ndarray | tuple[float, ...] = ()) -> DailyForecast:
    """Daily statistics of members that are daily means already, ``members`` (K+1, M, B) [unit of the
    thresholds]: mean, quantiles, the fraction of members reaching each threshold per day and on any
    day 1..K (members are trajectories, e.g. after ensemble copula coupling)."""
    members = np.asarray(members, dtype=float)
    thr = np.asarray(thresholds, dtype=float).reshape(-1)
    return DailyForecast(
        day_end_d=np.asarray(day_end_d, dtype=float),
        mean=members.mean(axis=1),
        quantiles=np.quantile(members, QUANTILES, axis=1),
        exceedance=(members[..., None] >= thr).mean(axis=1),
        members=members,
        horizon_exceedance=(members[1:].max(axis=0)[..., None] >= thr).mean(axis=0),
    )


def simulate_with_model_error(states: np.ndarray, spec, drivers, t0_d: float, horizon_days: int, *,
                              params: dict | None = None, log_sd_per_d: float = 0.0, floor_ugL: float = 1e-3,
                              seed=None) -> np.ndarray:
    """The ensemble run hourly to the horizon with stochastic model error, (24·K + 1, M, n_state) [µg/L].

    At the end of each forecast day every member's state is multiplied by a
    log-normal factor of sd ``log_sd_per_d`` [log units, one day], the
    model-error process the filter assumes between analyses (a random walk in
    log space; Evensen 2009, *Data Assimilation*, 2nd ed., ch. 4), so the
    forecast's spread grows as the filter's does. ``seed`` seeds the draws: two
    runs with the same seed (a what-if and the run without it) draw the same,
    and each member draws from its own stream, so the first m members of a run
    draw as the first m of a larger one. The saved state at each day's end is
    the state before that day's draw.
    """
    from assimilation import integrate, transform  # local: integrate imports this module's neighbours

    x, parts = np.asarray(states, dtype=float), []
    base = list(np.atleast_1d(seed)) if seed is not None else []
    streams = [np.random.default_rng([*base, m]) for m in range(x.shape[0])]
    for day in range(int(horizon_days)):
        save = t0_d + day + np.arange(0 if day == 0 else 1, 25) / 24.0
        part = integrate.simulate(x, spec, drivers, t0_d + day, save, params=params)
        parts.append(part)
        x = part[-1]
        if log_sd_per_d > 0:
            noise = np.stack([s.standard_normal(x.shape[1]) for s in streams])
            x = transform.from_log(transform.to_log(x, floor_ugL) + log_sd_per_d * noise)
    return np.concatenate(parts, axis=0)
