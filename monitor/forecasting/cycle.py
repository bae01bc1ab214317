"""One assimilation-and-forecast cycle per water body, in three steps.

1. :func:`gather` reads what a cycle needs from the store (the newest
   checkpoint, QC-passed observations since it, observed and forecast
   drivers) into a picklable :class:`CycleInputs`.
2. :func:`compute` is a pure function of those inputs: ensemble Kalman
   filter analysis (``assimilation.filter_cycle``), ensemble forecast to the
   horizon (``assimilation.integrate``) and daily statistics
   (``assimilation.forecast``). It runs in-process or on a Dask worker.
3. :func:`record` stores the checkpoint and the forecast run, evaluates
   the alert rules and queues the messages, in one transaction.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from sqlalchemy.engine import Connection, Engine

from assimilation import filter_cycle, integrate
from assimilation.augmentation import split
from assimilation.checkpoint import Checkpoint
from assimilation.filter_config import FilterConfig
from assimilation.first_guess import DEFAULT_FIRST_GUESS
from assimilation.forecast import QUANTILES, daily_statistics
from assimilation.observe import OBSERVABLE_KINDS, Observations
from assimilation.spec import Drivers, ModelSpec, StateLayout
from monitor.alerting import rules as alerts
from monitor.alerting import webhooks
from monitor.config import Config, WaterBodyConfig
from monitor.config.model_setup import chlorophyll_sensors, filter_config, model_spec
from monitor.forecasting.baselines import baseline_members
from monitor.forecasting.drivers import StationSeries, driver_stations, forecast_drivers, observed_drivers
from monitor.forecasting.history import OBSERVED_BY, ObservedHistory, observed_history
from monitor.forecasting.quantities import QUANTITIES
from monitor.store import runs as store
from monitor.store.readings import latest_driver_forecast, readings_frame
from monitor.timeutil import from_epoch_days, to_epoch_days

#: Air-temperature offsets [°C] of the forecast's driver scenarios; members are
#: spread over them so the forecast carries weather uncertainty (common practice
#: for driver ensembles).
DRIVER_SCENARIOS_C = (-1.5, 0.0, 1.5)



# --------------------------------------------------------------------------
# Step 1: gather


@dataclass
class CycleInputs:
    water_body_id: str
    analysis_d: float
    spec: ModelSpec
    filter: FilterConfig
    checkpoint: bytes | None
    start_d: float
    initial_state: np.ndarray | None
    seed: int
    observations: Observations
    drivers: Drivers
    forecast_drivers: list[Drivers]
    horizon_days: int
    thresholds_ugL: tuple[float, ...]
    window_days: float = 1.0
    basin_ids: tuple[str, ...] = ()
    history: ObservedHistory = field(default_factory=ObservedHistory)
    #: basin id of each chlorophyll sensor whose gain the filter estimates (gain columns in order)
    sensor_basins: tuple[str, ...] = ()


def station_readings(engine: Engine, config: Config, wb: WaterBodyConfig, start: dt.datetime,
                     end: dt.datetime) -> pd.DataFrame:
    """Stored readings of every station of ``wb`` (basins, gauges, weather) in [start, end]."""
    stations = sorted({s.id for s in config.stations_of(wb.id)} | set(driver_stations(config, wb)))
    max_flag = 3 if config.filter.assimilate_suspect else 1
    return readings_frame(engine, stations=stations, start=start, end=end, max_flag=max_flag)


def observations_frame(frame: pd.DataFrame, config: Config, wb: WaterBodyConfig, after: dt.datetime) -> pd.DataFrame:
    """The assimilable readings of ``wb``'s basins later than ``after``."""
    if frame.empty:
        return frame
    basin_stations = {s.id for s in config.stations_of(wb.id) if s.basin is not None}
    return frame[frame.station_id.isin(basin_stations) & frame.variable.isin(OBSERVABLE_KINDS)
                 & (frame.time_utc > after)]


def to_observations(frame: pd.DataFrame, config: Config, wb: WaterBodyConfig) -> Observations:
    """Stored readings → :class:`Observations` with per-variable error sd from the config."""
    if frame.empty:
        return Observations.empty()
    basin_of = {s.id: wb.basin_index(s.basin) for s in config.stations_of(wb.id) if s.basin}
    sensors = chlorophyll_sensors(config, wb)
    sensor_of = {sid: i for i, sid in enumerate(sensors)}
    values = frame.value.to_numpy(dtype=float)
    kinds = frame.variable.to_numpy(dtype=str)
    fraction = np.array([config.observation_errors[k].fraction for k in kinds])
    floor = np.array([config.observation_errors[k].floor for k in kinds])
    sensor = np.array([sensor_of.get(s, -1) if k == "chlorophyll_fluorescence" else -1
                       for s, k in zip(frame.station_id, kinds)], dtype=int)
    return Observations(time_d=np.asarray(to_epoch_days(frame.time_utc)), kind=kinds,
                        basin=frame.station_id.map(basin_of).to_numpy(dtype=int), sensor=sensor,
                        value=values, error_sd=np.maximum(floor, fraction * np.abs(values)))


def first_guess(engine: Engine, config: Config, wb: WaterBodyConfig, spec: ModelSpec,
                at: dt.datetime) -> np.ndarray:
    """A first-guess state from the most recent samples before ``at`` (defaults where none)."""
    layout = StateLayout(spec)
    B, G = spec.n_basins, spec.n_groups
    cyano = spec.cyanobacteria_index
    frame = observations_frame(station_readings(engine, config, wb, at - dt.timedelta(days=14),
                                                at + dt.timedelta(days=2)), config, wb, at - dt.timedelta(days=14))
    basin_of = {s.id: wb.basin_index(s.basin) for s in config.stations_of(wb.id) if s.basin}
    N = np.full(B, DEFAULT_FIRST_GUESS.nitrogen_ugL)
    P = np.full(B, DEFAULT_FIRST_GUESS.phosphorus_ugL)
    total = np.full(B, DEFAULT_FIRST_GUESS.other_chlorophyll_ugL + DEFAULT_FIRST_GUESS.cyanobacteria_chlorophyll_ugL)
    cy = np.full(B, DEFAULT_FIRST_GUESS.cyanobacteria_chlorophyll_ugL)
    if not frame.empty:
        frame = frame.assign(basin=frame.station_id.map(basin_of))
        med = frame.groupby(["basin", "variable"]).value.median()
        for (b, variable), v in med.items():
            v = max(float(v), 1e-3)
            if variable == "nitrate":
                N[b] = v
            elif variable == "srp":
                P[b] = v
            elif variable in ("chlorophyll_a", "chlorophyll_fluorescence"):
                total[b] = v
            elif variable == "phycocyanin":
                cy[b] = v
    A = np.empty((B, G))
    others = [g for g in range(G) if g != cyano]
    if cyano is None:
        A[:] = (total / G)[:, None]
    else:
        A[:, cyano] = np.minimum(cy, 0.9 * total)
        A[:, others] = (np.maximum(total - A[:, cyano], 0.1) / max(len(others), 1))[:, None]
    return layout.pack(N, P, A)


def gather(engine: Engine, config: Config, wb: WaterBodyConfig, analysis: dt.datetime,
           *, season_start: dt.datetime | None = None) -> CycleInputs:
    """Read everything one cycle of ``wb`` needs up to ``analysis`` (aware UTC)."""
    spec = model_spec(wb)
    cfg = filter_config(config, wb)
    found = store.latest_checkpoint(engine, wb.id, at_or_before=analysis - dt.timedelta(seconds=1))
    if found is not None:
        start, blob, guess = found[0], found[1], None
    else:
        start = season_start or (analysis - dt.timedelta(days=1))
        blob, guess = None, first_guess(engine, config, wb, spec, start)
    # One query for the cycle: from a few days before the checkpoint (to bridge
    # driver gaps) or two weeks before the analysis (for the outlook), whichever is earlier.
    frame = station_readings(engine, config, wb, min(start - dt.timedelta(days=3), analysis - dt.timedelta(days=14)),
                             analysis)
    series = StationSeries(frame)
    drivers = observed_drivers(series, config, wb, start, analysis)
    horizon = wb.alerts.horizon_days
    weather = (latest_driver_forecast(engine, wb.weather_station, issued_at_or_before=analysis)
               if wb.weather_station else pd.DataFrame())
    scenarios = forecast_drivers(series, weather, config, wb, analysis, horizon,
                                 temperature_offsets_C=DRIVER_SCENARIOS_C)
    return CycleInputs(
        water_body_id=wb.id, analysis_d=float(to_epoch_days(analysis)), spec=spec, filter=cfg,
        checkpoint=blob, start_d=float(to_epoch_days(start)), initial_state=guess,
        seed=config.filter.seed + sum(map(ord, wb.id)),
        observations=to_observations(observations_frame(frame, config, wb, start), config, wb),
        drivers=drivers, forecast_drivers=scenarios,
        horizon_days=horizon, thresholds_ugL=tuple(lv.chlorophyll_ugL for lv in wb.alerts.levels),
        window_days=config.filter.window_days, basin_ids=tuple(b.id for b in wb.basins),
        history=observed_history(engine, config, wb, analysis),
        sensor_basins=tuple(config.station(s).basin for s in chlorophyll_sensors(config, wb)))


# --------------------------------------------------------------------------
# Step 2: compute (pure)


@dataclass
class CycleOutputs:
    water_body_id: str
    analysis_d: float
    status: str
    message: str
    checkpoint: bytes | None
    diagnostics: dict = field(default_factory=dict)
    forecasts: dict = field(default_factory=dict)  # quantity -> assimilation.forecast.DailyForecast
    basin_ids: tuple[str, ...] = ()
    #: (basin, quantity, forecaster, observed variable, members (days, M)) of the baselines
    baselines: list = field(default_factory=list)
    #: (basin, quantity) -> the observed variable that verifies it
    verified_by: dict = field(default_factory=dict)
    #: basin -> each member's mean estimated gain of the basin's chlorophyll sensors (M,)
    sensor_gain: dict = field(default_factory=dict)


def compute(inputs: CycleInputs) -> CycleOutputs:
    """Analysis and forecast for one water body: a pure function of its inputs."""
    spec, cfg = inputs.spec, inputs.filter
    if inputs.checkpoint is None:
        rng = np.random.default_rng(inputs.seed)
        ckpt = filter_cycle.initial_checkpoint(spec, cfg, inputs.start_d, rng, initial_state=inputs.initial_state)
    else:
        ckpt = Checkpoint.from_bytes(inputs.checkpoint)
    try:
        result = filter_cycle.assimilate(ckpt, inputs.observations, spec, inputs.drivers, cfg, inputs.analysis_d)
    except (ValueError, FloatingPointError, np.linalg.LinAlgError) as exc:
        return CycleOutputs(inputs.water_body_id, inputs.analysis_d, "failed", f"analysis failed: {exc}",
                            None, {}, {}, inputs.basin_ids)
    if result.status == "failed":
        return CycleOutputs(inputs.water_body_id, inputs.analysis_d, "failed", result.message, None,
                            _jsonable(result.diagnostics), {}, inputs.basin_ids)
    states, params, gains = split(result.checkpoint, spec)
    forecasts = _forecast(states, params, spec, inputs)
    verified_by = {(b, q): s.variable for b in inputs.basin_ids for q in OBSERVED_BY
                   if (s := inputs.history.get(b, q)) is not None}
    sensor_gain = _basin_sensor_gains(gains, inputs.sensor_basins, inputs.basin_ids)
    issued_baselines = list(baseline_members(inputs.history, inputs.basin_ids, inputs.analysis_d,
                                             inputs.horizon_days))
    return CycleOutputs(inputs.water_body_id, inputs.analysis_d, result.status, result.message,
                        result.checkpoint.to_bytes(), _jsonable(result.diagnostics), forecasts, inputs.basin_ids,
                        issued_baselines, verified_by, sensor_gain)


def _basin_sensor_gains(gains: np.ndarray, sensor_basins: tuple[str, ...], basin_ids) -> dict:
    """Each member's mean gain of a basin's chlorophyll sensors: basin -> (M,) [-].

    The observation operator of a fluorometer is gain · total chlorophyll-a
    (:mod:`assimilation.observe`), so a forecast verified against
    fluorescence is multiplied by the member's estimated gain.
    """
    if gains is None or np.size(gains) == 0 or not sensor_basins:
        return {}
    gains = np.asarray(gains, dtype=float).reshape(-1, len(sensor_basins))
    return {b: gains[:, [i for i, s in enumerate(sensor_basins) if s == b]].mean(axis=1)
            for b in basin_ids if b in sensor_basins}


def _forecast(states, params, spec, inputs: CycleInputs) -> dict:
    """Run the analysis ensemble to the horizon in one call, members spread over the driver scenarios."""
    layout = StateLayout(spec)
    M = states.shape[0]
    t0 = inputs.analysis_d
    save = t0 + np.arange(0, 24 * inputs.horizon_days + 1) / 24.0
    scenarios = inputs.forecast_drivers
    base = scenarios[0]
    member_scenario = np.arange(M) % len(scenarios)
    temps = np.stack([d.water_temperature_C for d in scenarios])          # (S, T, B)
    drivers = dataclasses.replace(base, water_temperature_C=np.transpose(temps[member_scenario], (1, 0, 2)))
    traj = integrate.simulate(states, spec, drivers, t0, save, params=params or None)
    chl = layout.chlorophyll(traj)
    cyano = [g for g, grp in enumerate(spec.groups) if grp.is_cyanobacteria]
    series = {
        "cyanobacteria_chlorophyll": chl[..., cyano].sum(axis=-1),
        "total_chlorophyll": chl.sum(axis=-1),
        "nitrogen": layout.nitrogen(traj),
        "phosphorus": layout.phosphorus(traj),
    }
    return {q: daily_statistics(save, series[q], t0, inputs.horizon_days,
                                inputs.thresholds_ugL if q == alerts.QUANTITY else ())
            for q in QUANTITIES}


def _jsonable(obj):
    """Diagnostics → plain JSON types (numpy arrays and scalars become lists and floats)."""
    if isinstance(obj, dict):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _jsonable(obj.tolist())
    if isinstance(obj, (np.floating, float)):
        return None if not math.isfinite(float(obj)) else float(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    return obj


# --------------------------------------------------------------------------
# Step 3: record


def forecast_rows(outputs: CycleOutputs):
    """(basin_id, valid_utc, quantity, statistic, value) rows of a cycle's forecast."""
    for quantity, fc in outputs.forecasts.items():
        for k, day_end in enumerate(fc.day_end_d):
            valid = from_epoch_days(day_end)
            for b, basin in enumerate(outputs.basin_ids):
                yield basin, valid, quantity, "mean", fc.mean[k, b]
                for qi, q in enumerate(QUANTILES):
                    yield basin, valid, quantity, f"q{round(q * 100):02d}", fc.quantiles[qi, k, b]
                for level in range(fc.exceedance.shape[2]):
                    yield basin, valid, quantity, f"p_level_{level + 1}", fc.exceedance[k, b, level]


def member_rows(outputs: CycleOutputs):
    """(basin, quantity, forecaster, observed variable, members (days, M)) of Bloomline's forecast
    (where an observed series verifies it) and of the baselines issued with it."""
    for (basin, quantity), variable in outputs.verified_by.items():
        fc = outputs.forecasts.get(quantity)
        if fc is None:
            continue
        members = fc.members[:, :, outputs.basin_ids.index(basin)]
        if variable == "chlorophyll_fluorescence" and basin in outputs.sensor_gain:
            members = members * outputs.sensor_gain[basin][None, :]  # what the sensor will read
        yield basin, quantity, "bloomline", variable, members
    yield from outputs.baselines


def latest_observed(engine: Engine, config: Config, wb: WaterBodyConfig, analysis: dt.datetime,
                    window: dt.timedelta = dt.timedelta(days=1)) -> dict[str, float | None]:
    """Mean QC-passed phycocyanin (cyanobacteria chlorophyll-a) per basin over the last day [µg/L]."""
    stations = {s.id: s.basin for s in config.stations_of(wb.id, variable="phycocyanin") if s.basin}
    out: dict[str, float | None] = {b.id: None for b in wb.basins}
    if not stations:
        return out
    frame = readings_frame(engine, stations=list(stations), variables=["phycocyanin"],
                           start=analysis - window, end=analysis, max_flag=1)
    if not frame.empty:
        for station, value in frame.groupby("station_id").value.mean().items():
            out[stations[station]] = float(value)
    return out


def record(engine: Engine, config: Config, outputs: CycleOutputs, *, now: dt.datetime | None = None,
           guard: Callable[[Connection], None] | None = None) -> dict:
    """Store a cycle's checkpoint and forecast and evaluate the alert rules, in one transaction; returns a summary.

    The checkpoint, the forecast run with its values and members, the alert
    status and events, and the outbox rows of the emails and webhook calls
    commit together or not at all, so a crash leaves no visible intermediate
    state (no checkpoint without its run, no run whose alert level is not
    published). Recording the same cycle again replaces the run and changes
    no alert (:func:`monitor.alerting.rules.evaluate_run` skips a run already
    evaluated) and queues no message twice. ``guard(conn)`` runs first in
    the transaction and raises to refuse it (the scheduler's lease).

    After a cold start the alert rules wait ``spin_up_cycles`` cycles, while
    the ensemble's first-guess spread settles on the readings.
    """
    wb = config.water_body(outputs.water_body_id)
    analysis = from_epoch_days(outputs.analysis_d)
    observed = latest_observed(engine, config, wb, analysis) if outputs.forecasts else {}
    message = outputs.message
    with engine.begin() as conn:
        if guard is not None:
            guard(conn)
        warm = store.count_forecast_runs(conn, wb.id, before=analysis) >= config.filter.spin_up_cycles
        if outputs.forecasts and not warm:
            message = (message + "; " if message else "") + \
                f"spin-up: alert rules start after {config.filter.spin_up_cycles} cycles"
        if outputs.checkpoint is not None:
            store.save_checkpoint(conn, wb.id, analysis, outputs.checkpoint, now=now)
        run_id = store.save_forecast_run(conn, wb.id, analysis, outputs.status, message,
                                         outputs.diagnostics, forecast_rows(outputs),
                                         members=member_rows(outputs), now=now)
        events = []
        if outputs.forecasts and warm:
            events = alerts.evaluate_run(conn, config, wb.id, run_id, observed, now or analysis)
        if outputs.forecasts:
            maxima = alerts.exceedance_maxima(conn, run_id, analysis, wb.alerts.horizon_days)
            webhooks.enqueue_forecast(conn, config, wb, run_id=run_id, analysis=analysis, status=outputs.status,
                                      maxima=maxima, now=now or analysis)
    return {"water_body": wb.id, "analysis_utc": analysis.isoformat(), "status": outputs.status,
            "message": message, "run_id": run_id, "events": events}
