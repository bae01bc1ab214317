"""Forecast–observation pairs of issued runs and of the baselines on the same days.

For every stored run (origin t0) of a water body, every basin and verified
quantity with an observed series, and every lead day k = 1..H whose window
(t0 + k − 1 d, t0 + k d] holds an observation, one *pair* holds the observed
daily value and each forecaster's members for that day:

* ``bloomline`` — the run's stored member daily means (``forecast_members``);
* ``persistence`` — the last observed value (one member);
* ``persistence_ensemble`` — the last value times the series' own log changes;
* ``climatology`` — the same season of earlier years (absent in a first year);
* ``statistical`` — a first-order autoregression of log chlorophyll-a with
  water temperature as regressor (statsmodels).

Baselines see only the observed days at or before the origin
(:mod:`assimilation.baselines`), so every forecaster is scored on exactly
the same (origin, lead) pairs.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from sqlalchemy import select
from sqlalchemy.engine import Engine

from assimilation import baselines
from monitor.store import schema
from monitor.store.runs import load_forecast_members
from monitor.timeutil import from_epoch_days, to_epoch_days

FORECASTERS = ("bloomline", "persistence", "persistence_ensemble", "climatology", "statistical")
BASELINES = FORECASTERS[1:]
#: A baseline's outlook at an origin: the largest daily probability of reaching each level
#: over the horizon (its members are per-lead marginals, so this is the within-horizon estimate).
OUTLOOK_COLUMNS = ["water_body", "basin_id", "quantity", "origin_utc", "forecaster", "level", "probability"]
META_COLUMNS = ["origin_utc", "valid_utc", "water_body", "basin_id", "quantity", "variable", "lead_days",
                "observed", "observed_n"]


@dataclass
class Pairs:
    """Pairs of one or more water bodies: ``meta`` (one row per pair, ``META_COLUMNS``) and, per
    forecaster, a list of member arrays [µg/L] aligned with ``meta`` (None where it has no forecast)."""

    meta: pd.DataFrame
    members: dict[str, list[np.ndarray | None]] = field(default_factory=dict)
    outlooks: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=OUTLOOK_COLUMNS))

    @staticmethod
    def concat(parts: list[Pairs]) -> Pairs:
        parts = [p for p in parts if len(p.meta)]
        if not parts:
            return Pairs(pd.DataFrame(columns=META_COLUMNS), {f: [] for f in FORECASTERS})
        meta = pd.concat([p.meta for p in parts], ignore_index=True)
        outlooks = pd.concat([p.outlooks for p in parts], ignore_index=True)
        return Pairs(meta, {f: [m for p in parts for m in p.members[f]] for f in FORECASTERS}, outlooks)


def stored_runs(engine: Engine, water_body_id: str) -> pd.DataFrame:
    """Runs of a water body with a forecast: id, analysis_utc, status (oldest first)."""
    runs = schema.forecast_runs
    q = (select(runs.c.id, runs.c.analysis_utc, runs.c.status)
         .where((runs.c.water_body_id == water_body_id) & (runs.c.status != "failed"))
         .order_by(runs.c.analysis_utc))
    with engine.connect() as conn:
        return pd.DataFrame(conn.execute(q).all(), columns=["id", "analysis_utc", "status"])


def _series(observed: pd.DataFrame, basin: str, quantity: str) -> tuple[np.ndarray, np.ndarray, str]:
    sub = observed[(observed.basin_id == basin) & (observed.quantity == quantity)]
    if sub.empty:
        return np.empty(0), np.empty(0), ""
    return (np.asarray(to_epoch_days(sub.day_end_utc), dtype=float), sub.value.to_numpy(dtype=float),
            str(sub.variable.iloc[0]))


def _on_grid(days_d: np.ndarray, values: np.ndarray, grid_d: np.ndarray) -> np.ndarray:
    """``values`` placed on the daily ``grid_d`` (NaN where a day has none)."""
    out = np.full(grid_d.size, np.nan)
    pos = np.rint(days_d - grid_d[0]).astype(int)
    ok = (pos >= 0) & (pos < grid_d.size)
    out[pos[ok]] = values[ok]
    return out


#: The statistical baseline's parameters are refitted at most this often [d]; between
#: refits the series up to the origin is filtered with the last fit (data before it only).
REFIT_EVERY_DAYS = 7


def baseline_members(days_d: np.ndarray, values: np.ndarray, temp_days_d: np.ndarray, temp: np.ndarray,
                     origin_d: float, horizon: int, fits: dict | None = None) -> dict[str, np.ndarray | None]:
    """Each baseline's members (M, H) [µg/L] from the observed days at or before ``origin_d``.

    ``fits`` (a dict the caller keeps per series) holds the statistical
    model's last fit: ``{"origin_d": …, "params": …}``.
    """
    before = days_d <= origin_d + 1e-9
    if not np.any(np.isfinite(values[before])):
        return dict.fromkeys(BASELINES)
    grid = np.arange(days_d[before][0], origin_d + 0.5, 1.0)
    chl = _on_grid(days_d[before], values[before], grid)
    t = _on_grid(temp_days_d, temp, grid) if temp.size else None
    if t is not None and not np.any(np.isfinite(t)):
        t = None
    clim = baselines.climatology(grid, chl, origin_d, horizon).members_ugL
    fits = {} if fits is None else fits
    reuse = fits.get("params") if origin_d - fits.get("origin_d", -np.inf) < REFIT_EVERY_DAYS else None
    statistical = baselines.ar1_forecast(grid, chl, origin_d, horizon, temperature_C=t, params=reuse)
    if reuse is None and statistical.params is not None:
        fits.update(origin_d=origin_d, params=statistical.params)
    return {
        "persistence": baselines.persistence(grid, chl, origin_d, horizon).members_ugL,
        "persistence_ensemble": baselines.persistence_ensemble(grid, chl, origin_d, horizon).members_ugL,
        "climatology": None if np.all(np.isnan(clim)) else clim,
        "statistical": statistical.members_ugL,
    }


def water_body_pairs(engine: Engine, water_body_id: str, observed: pd.DataFrame, horizon: int,
                     quantities: tuple[str, ...], thresholds: tuple[float, ...] = (), *,
                     progress: Callable[[], None] | None = None) -> Pairs:
    """Pairs of every stored run of ``water_body_id`` against ``observed`` (see :mod:`.observed`)."""
    runs = stored_runs(engine, water_body_id)
    members = load_forecast_members(engine, runs.id.tolist())
    rows: list[dict] = []
    outlooks: list[tuple] = []
    out: dict[str, list] = {f: [] for f in FORECASTERS}
    basins = sorted(set(observed.basin_id)) if len(observed) else []
    fits: dict[tuple[str, str], dict] = {}
    for run_id, origin in zip(runs.id, runs.analysis_utc):
        origin_d = float(to_epoch_days(origin))
        for basin in basins:
            temp_days, temp, _ = _series(observed, basin, "water_temperature")
            for quantity in quantities:
                days_d, values, variable = _series(observed, basin, quantity)
                ens = members.get((run_id, basin, quantity))
                if ens is None or days_d.size == 0:
                    continue
                base = baseline_members(days_d, values, temp_days, temp, origin_d, horizon,
                                        fits.setdefault((basin, quantity), {}))
                for name, m in base.items():
                    for lv, thr in enumerate(thresholds, start=1):
                        if m is not None:
                            p = float(np.nanmax((m >= thr).mean(axis=0)))
                            outlooks.append((water_body_id, basin, quantity, origin, name, lv, p))
                lead_obs = {int(round(d - origin_d)): (v, d) for d, v in zip(days_d, values)
                            if 1 <= round(d - origin_d) <= min(horizon, ens.shape[0] - 1)}
                if not lead_obs:
                    continue
                if base["persistence"] is None:
                    continue
                n_of = observed[(observed.basin_id == basin) & (observed.quantity == quantity)] \
                    .set_index("day_end_utc").n
                for lead, (value, day_d) in sorted(lead_obs.items()):
                    valid = from_epoch_days(day_d)
                    rows.append(dict(origin_utc=origin, valid_utc=valid, water_body=water_body_id,
                                     basin_id=basin, quantity=quantity, variable=variable, lead_days=lead,
                                     observed=float(value), observed_n=int(n_of.get(pd.Timestamp(valid), 0))))
                    out["bloomline"].append(ens[lead])
                    for name in BASELINES:
                        m = base[name]
                        out[name].append(None if m is None or not np.all(np.isfinite(m[:, lead - 1]))
                                         else m[:, lead - 1])
        if progress is not None:
            progress()
    return Pairs(pd.DataFrame(rows, columns=META_COLUMNS), out, pd.DataFrame(outlooks, columns=OUTLOOK_COLUMNS))
