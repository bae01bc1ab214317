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

import datetime as dt
import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from sqlalchemy.engine import Connection, Engine

from assimilation import filter_cycle
from assimilation.augmentation import split
from assimilation.checkpoint import Checkpoint
from assimilation.filter_config import FilterConfig
from assimilation.first_guess import (
    DEFAULT_FIRST_GUESS,
    detrital_nitrogen_from_phosphorus,
    detrital_phosphorus_from_total,
)
from assimilation.forcing import member_drivers
from assimilation.forecast import QUANTILES, daily_statistics, simulate_with_model_error
from assimilation.observe import Observations
from assimilation.spec import Drivers, ModelSpec, StateLayout
from monitor.alerting import rules as alerts
from monitor.alerting import webhooks
from monitor.config import Config, WaterBodyConfig
from monitor.config.model_setup import chlorophyll_sensors, filter_config, model_spec
from monitor.forecasting.baselines import baseline_members
from monitor.forecasting.blend_setup import COMPONENTS, RECORD_DAYS, blend_settings
from monitor.forecasting.drivers import StationSeries, driver_stations, forecast_drivers, observed_drivers
from monitor.forecasting.history import (
    OBSERVED_BY,
    ObservedHistory,
    history_daily,
    history_from_daily,
    seasonal_mean,
)
from monitor.forecasting.late import delayed_restart, late_restart, replay_availability
from monitor.forecasting.observations import OBSERVED_VARIABLES, to_observations
from monitor.forecasting.observed_level import latest_observed
from monitor.forecasting.publish import publish
from monitor.forecasting.quantities import QUANTITIES, quantity_series
from monitor.store import runs as store
from monitor.store.availability import Availability
from monitor.store.readings import latest_driver_forecast, readings_frame
from monitor.timeutil import from_epoch_days, to_epoch_days
from monitor.verification.live import stored_records

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
    #: chlorophyll quantity -> the blend's settings per lead (from the record; priors by default)
    blend: dict = field(default_factory=dict)
    #: drivers substituted for missing readings, in words (the run is then "degraded")
    substitutions: tuple[str, ...] = ()
    #: late readings taken in (or left out), in words, for the run's message
    late_note: str = ""
    #: publish the calibrated blend instead of the process model (``[filter] published``)
    publish_blend: bool = True
    #: basin id of each chlorophyll sensor whose gain the filter estimates (gain columns in order)
    sensor_basins: tuple[str, ...] = ()


def station_readings(engine: Engine, config: Config, wb: WaterBodyConfig, start: dt.datetime,
                     end: dt.datetime, *, available: Availability | None = None) -> pd.DataFrame:
    """Stored readings of every station of ``wb`` (basins, gauges, weather) in [start, end]
    (in a replay, ``available``: only those available by then)."""
    return readings_frame(engine, stations=cycle_stations(config, wb), start=start, end=end,
                          max_flag=assimilated_flag(config), available=available)


def cycle_stations(config: Config, wb: WaterBodyConfig) -> list[str]:
    """Every station a cycle of ``wb`` reads: its basins' and gauges' and its drivers'."""
    return sorted({s.id for s in config.stations_of(wb.id)} | set(driver_stations(config, wb)))


def assimilated_flag(config: Config) -> int:
    """The worst QC flag a cycle reads (3 with ``[filter] assimilate_suspect``, else 1: passed only)."""
    return 3 if config.filter.assimilate_suspect else 1


def observations_frame(frame: pd.DataFrame, config: Config, wb: WaterBodyConfig, after: dt.datetime) -> pd.DataFrame:
    """The assimilable readings of ``wb``'s basins later than ``after``."""
    if frame.empty:
        return frame
    basin_stations = {s.id for s in config.stations_of(wb.id) if s.basin is not None}
    return frame[frame.station_id.isin(basin_stations) & frame.variable.isin(OBSERVED_VARIABLES)
                 & (frame.time_utc > after)]


def assimilable(engine: Engine, config: Config, wb: WaterBodyConfig, frame: pd.DataFrame, after: dt.datetime,
                until: dt.datetime, *, available: Availability | None = None) -> pd.DataFrame:
    """The plain readings of ``frame`` and the censored ones of the store that the filter may use in
    (after, until] (:func:`assimilable_rows`); in a replay (``available``) only those available by then
    (time plus the station's reporting delay)."""
    if available is not None:
        frame = available.filter(frame)
    return assimilable_rows(frame, censored_frame(engine, config, wb, after, until, available=available),
                            config, wb, after)


def assimilable_rows(frame: pd.DataFrame, censored: pd.DataFrame, config: Config, wb: WaterBodyConfig,
                     after: dt.datetime) -> pd.DataFrame:
    """The plain readings of ``frame`` later than ``after`` and the ``censored`` ones (of
    :func:`censored_frame`) that the filter may use, with columns ``censored`` and ``detection_limit``.
    No I/O: in a replay both frames were read with the replay's availability."""
    plain = observations_frame(frame, config, wb, after).assign(censored=False, detection_limit=np.nan)
    parts = [f for f in (plain, censored) if not f.empty]
    return pd.concat(parts, ignore_index=True) if len(parts) == 2 else (parts[0] if parts else plain)


def censored_frame(engine: Engine, config: Config, wb: WaterBodyConfig, after: dt.datetime,
                   until: dt.datetime, *, available: Availability | None = None) -> pd.DataFrame:
    """The censored (below-detection) readings of ``wb``'s basins in (after, until], with their limits."""
    stations = [s.id for s in config.stations_of(wb.id) if s.basin is not None]
    frame = readings_frame(engine, stations=stations, variables=OBSERVED_VARIABLES, start=after, end=until,
                           max_flag=0, include_censored=True, available=available)
    return frame[frame.censored & (frame.time_utc > after)]


def first_guess(engine: Engine | None, config: Config, wb: WaterBodyConfig, spec: ModelSpec,
                at: dt.datetime, *, frame: pd.DataFrame | None = None,
                available: Availability | None = None) -> np.ndarray:
    """A first-guess state from the most recent samples before ``at`` (defaults where none).

    Each pool takes the median of its samples; detrital P is what a total-P
    sample leaves after SRP and algal P (:func:`detrital_phosphorus_from_total`),
    detrital N the same at the algae's N:P; without a total-P sample both keep
    their defaults. ``frame``: the readings of ``wb``'s stations from 14 days
    before ``at`` to 2 days after, when already read (else read from ``engine``).
    """
    layout = StateLayout(spec)
    B, G = spec.n_basins, spec.n_groups
    cyano = spec.cyanobacteria_index
    if frame is None:
        frame = station_readings(engine, config, wb, at - dt.timedelta(days=14), at + dt.timedelta(days=2),
                                 available=available)
    frame = observations_frame(frame, config, wb, at - dt.timedelta(days=14))
    basin_of = {s.id: wb.basin_index(s.basin) for s in config.stations_of(wb.id) if s.basin}
    N = np.full(B, DEFAULT_FIRST_GUESS.nitrogen_ugL)
    P = np.full(B, DEFAULT_FIRST_GUESS.phosphorus_ugL)
    total = np.full(B, DEFAULT_FIRST_GUESS.other_chlorophyll_ugL + DEFAULT_FIRST_GUESS.cyanobacteria_chlorophyll_ugL)
    cy = np.full(B, DEFAULT_FIRST_GUESS.cyanobacteria_chlorophyll_ugL)
    DP = np.full(B, DEFAULT_FIRST_GUESS.detrital_phosphorus_ugL)
    DN = np.full(B, DEFAULT_FIRST_GUESS.detrital_nitrogen_ugL)
    tp = np.full(B, np.nan)
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
            elif variable == "total_phosphorus":
                tp[b] = v
    sampled = np.isfinite(tp)
    DP[sampled] = detrital_phosphorus_from_total(tp[sampled], P[sampled], total[sampled], spec)
    DN[sampled] = detrital_nitrogen_from_phosphorus(DP[sampled], spec)
    A = np.empty((B, G))
    others = [g for g in range(G) if g != cyano]
    if cyano is None:
        A[:] = (total / G)[:, None]
    else:
        A[:, cyano] = np.minimum(cy, 0.9 * total)
        A[:, others] = (np.maximum(total - A[:, cyano], 0.1) / max(len(others), 1))[:, None]
    return layout.pack(N, P, A, DN, DP)


def outlook_drivers(engine: Engine, config: Config, wb: WaterBodyConfig, series: StationSeries,
                    analysis: dt.datetime, horizon_days: int, *, history: ObservedHistory | None = None,
                    notes: list[str] | None = None, weather: pd.DataFrame | None = None) -> list[Drivers]:
    """The forecast's driver scenarios from ``analysis`` (aware UTC) over ``horizon_days``: the newest
    weather forecast issued by then (else a persistence climatology), one scenario per entry of
    :data:`DRIVER_SCENARIOS_C`. ``series`` holds the last two weeks of readings of ``wb``'s stations;
    ``history`` (the observed daily history) gives the water temperature's seasonal climatology used
    when there is no weather feed; substitutions are named in ``notes``. ``weather``: the weather
    forecast when already read (else read from ``engine``)."""
    if weather is None:
        weather = (latest_driver_forecast(engine, wb.weather_station, issued_at_or_before=analysis)
                   if wb.weather_station else pd.DataFrame())
    climatology = {}
    if history is not None:
        centre_d = float(to_epoch_days(analysis)) + horizon_days / 2
        climatology = {b.id: c for b in wb.basins
                       if (c := seasonal_mean(history, b.id, "water_temperature", centre_d)) is not None}
    return forecast_drivers(series, weather, config, wb, analysis, horizon_days,
                            temperature_offsets_C=DRIVER_SCENARIOS_C, temperature_climatology_C=climatology,
                            notes=notes)


@dataclass
class FetchedInputs:
    """What the store holds for one cycle of one water body; :func:`assemble` makes the
    :class:`CycleInputs` from it without I/O. Read one water body at a time by :func:`fetch`, many at
    once by :func:`monitor.forecasting.batch_gather.fetch`."""

    water_body_id: str
    analysis: dt.datetime
    start: dt.datetime
    checkpoint: bytes | None
    late_note: str
    #: :func:`station_readings` over :func:`reading_window`
    readings: pd.DataFrame
    #: :func:`censored_frame` over (start, analysis]
    censored: pd.DataFrame
    #: cold start: :func:`station_readings` over :func:`first_guess_window` (None when warm)
    first_guess_readings: pd.DataFrame | None
    #: the newest weather forecast issued by the analysis (empty without a weather station)
    weather: pd.DataFrame
    #: daily means per history window (:func:`monitor.forecasting.history.history_daily`)
    history_daily: list[pd.DataFrame]
    #: the verified record of the blend's components in its window (as
    #: :func:`monitor.forecasting.blend_setup.read_blend_settings` reads it)
    records: pd.DataFrame
    #: in a replay, what the readings above were restricted to (:func:`monitor.forecasting.late.replay_availability`)
    available: Availability | None = None


def cycle_start(engine: Engine, config: Config, wb: WaterBodyConfig, analysis: dt.datetime,
                found: tuple[dt.datetime, bytes] | None, *, season_start: dt.datetime | None = None,
                replay: bool = False, restart: Callable | None = None) -> tuple[dt.datetime, bytes | None, str]:
    """Where the cycle of ``wb`` at ``analysis`` starts: (start time, checkpoint or None for a cold
    start, note for the run's message), from ``found``, the newest checkpoint before ``analysis``.

    A checkpoint older than ``[filter] cold_start_gap_days`` is not used (a cold start); otherwise
    late readings may move the start back (:func:`monitor.forecasting.late.late_restart`, in a
    replay :func:`~monitor.forecasting.late.delayed_restart`; ``restart`` replaces that choice). A
    cold start begins at ``season_start`` when it is within the gap, else a day before ``analysis``.
    """
    late_note = ""
    gap = dt.timedelta(days=config.filter.cold_start_gap_days)
    if found is not None and analysis - found[0] > gap:
        late_note = (f"cold start: the newest checkpoint ({found[0]:%Y-%m-%d %H:%M} UTC) is more than "
                     f"{config.filter.cold_start_gap_days:g} days old (cold_start_gap_days)")
        found = None
    if found is not None:
        restart = restart or (delayed_restart if replay else late_restart)
        found, late_note = restart(engine, config, wb, analysis, found)
    elif not late_note and not replay:
        late_note = "cold start: no stored checkpoint"
    if found is not None:
        return found[0], found[1], late_note
    start = season_start if season_start is not None and analysis - season_start <= gap \
        else analysis - dt.timedelta(days=1)
    return start, None, late_note


def reading_window(start: dt.datetime, analysis: dt.datetime) -> tuple[dt.datetime, dt.datetime]:
    """The readings one cycle reads: from a few days before its start (to bridge driver gaps) or two
    weeks before the analysis (for the outlook), whichever is earlier, to the analysis."""
    return min(start - dt.timedelta(days=3), analysis - dt.timedelta(days=14)), analysis


def first_guess_window(start: dt.datetime) -> tuple[dt.datetime, dt.datetime]:
    """The readings a cold start's first guess is made from (:func:`first_guess`)."""
    return start - dt.timedelta(days=14), start + dt.timedelta(days=2)


def fetch(engine: Engine, config: Config, wb: WaterBodyConfig, analysis: dt.datetime,
          *, season_start: dt.datetime | None = None, replay: bool = False) -> FetchedInputs:
    """Everything one cycle of ``wb`` at ``analysis`` reads from the store (see :func:`gather`); in a
    replay, every reading through the replay's :class:`~monitor.store.availability.Availability`."""
    available = replay_availability(config, analysis) if replay else None
    found = store.latest_checkpoint(engine, wb.id, at_or_before=analysis - dt.timedelta(seconds=1))
    start, blob, late_note = cycle_start(engine, config, wb, analysis, found, season_start=season_start,
                                         replay=replay)
    weather = (latest_driver_forecast(engine, wb.weather_station, issued_at_or_before=analysis)
               if wb.weather_station else pd.DataFrame())
    return FetchedInputs(
        water_body_id=wb.id, analysis=analysis, start=start, checkpoint=blob, late_note=late_note,
        readings=station_readings(engine, config, wb, *reading_window(start, analysis), available=available),
        censored=censored_frame(engine, config, wb, start, analysis, available=available),
        first_guess_readings=(station_readings(engine, config, wb, *first_guess_window(start), available=available)
                              if blob is None else None),
        weather=weather, history_daily=history_daily(engine, config, wb, analysis, available=available),
        records=stored_records(engine, wb.id, since=analysis - dt.timedelta(days=RECORD_DAYS), forecasters=COMPONENTS),
        available=available)


def assemble(config: Config, wb: WaterBodyConfig, raw: FetchedInputs) -> CycleInputs:
    """The cycle's inputs from what was fetched: the cold start's first guess, observed and forecast
    drivers, the filter's observations, the observed history and the blend's settings. No I/O, so it
    may run on a Dask worker beside :func:`compute`."""
    spec = model_spec(wb)
    cfg = filter_config(config, wb)
    analysis, start = raw.analysis, raw.start
    guess = None if raw.checkpoint is not None else \
        first_guess(None, config, wb, spec, start, frame=raw.first_guess_readings)
    series = StationSeries(raw.readings)
    notes: list[str] = []
    drivers = observed_drivers(series, config, wb, start, analysis, notes)
    horizon = wb.alerts.horizon_days
    history = history_from_daily(config, wb, raw.history_daily)
    scenarios = outlook_drivers(None, config, wb, series, analysis, horizon, history=history, notes=notes,
                                weather=raw.weather)
    observed = assimilable_rows(raw.readings, raw.censored, config, wb, start)
    return CycleInputs(
        water_body_id=wb.id, analysis_d=float(to_epoch_days(analysis)), spec=spec, filter=cfg,
        checkpoint=raw.checkpoint, start_d=float(to_epoch_days(start)), initial_state=guess,
        seed=config.filter.seed + sum(map(ord, wb.id)),
        observations=to_observations(observed, config, wb),
        drivers=drivers, forecast_drivers=scenarios,
        horizon_days=horizon, thresholds_ugL=tuple(lv.chlorophyll_ugL for lv in wb.alerts.levels),
        window_days=config.filter.window_days, basin_ids=tuple(b.id for b in wb.basins),
        history=history, substitutions=tuple(notes), late_note=raw.late_note,
        publish_blend=config.filter.published == "blend",
        blend=blend_settings(raw.records, analysis, horizon),
        sensor_basins=tuple(config.station(s).basin for s in chlorophyll_sensors(config, wb)))


def gather(engine: Engine, config: Config, wb: WaterBodyConfig, analysis: dt.datetime,
           *, season_start: dt.datetime | None = None, replay: bool = False) -> CycleInputs:
    """Read everything one cycle of ``wb`` needs up to ``analysis`` (aware UTC): :func:`fetch`, then
    :func:`assemble`.

    ``replay``: readings count as available by their time stamps plus their
    station's ``reporting_delay_days`` (a replay of a stored history, where
    arrival times mean nothing) for every read here — observations, drivers
    and their substitutes, the first guess, the observed history; those that
    became available since the newest checkpoint are re-analysed like late readings.
    """
    return assemble(config, wb, fetch(engine, config, wb, analysis, season_start=season_start, replay=replay))


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
    #: (basin, quantity, forecaster, observed variable, members (days, M)) stored for verification:
    #: the published forecast, the process model's, the uncalibrated blend and the baselines
    verification_members: list = field(default_factory=list)


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
    status, message = result.status, result.message
    if inputs.late_note:
        message = "; ".join(m for m in (message, inputs.late_note) if m)
    if inputs.substitutions:
        status = "degraded" if status == "ok" else status
        message = "; ".join([m for m in (message, "drivers substituted: " + "; ".join(inputs.substitutions)) if m])
    published, verified_members = publish(forecasts, issued_baselines, inputs.basin_ids, verified_by, sensor_gain,
                                          inputs.blend, {alerts.QUANTITY: inputs.thresholds_ugL},
                                          publish_blend=inputs.publish_blend)
    diagnostics = _jsonable(result.diagnostics)
    diagnostics["blend"] = blend_diagnostics(inputs.blend, inputs.publish_blend)
    return CycleOutputs(inputs.water_body_id, inputs.analysis_d, status, message,
                        result.checkpoint.to_bytes(), diagnostics, published, inputs.basin_ids,
                        issued_baselines + verified_members)


def blend_diagnostics(settings: dict, published: bool) -> dict:
    """The blend's settings of this run, for the run's diagnostics: per chlorophyll quantity and
    lead day the component weights and the spread factor."""
    return {"published": published,
            "by_quantity": {q: [{"lead_days": k, "weights": {c: round(w, 4) for c, w in sorted(s.weights.items())},
                                 "spread_factor": round(s.spread_factor, 4)}
                                for k, s in enumerate(leads, start=1)]
                            for q, leads in settings.items()}}


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
    """Run the analysis ensemble to the horizon, members spread over the driver scenarios, with the
    filter's model error (:func:`assimilation.forecast.simulate_with_model_error`)."""
    t0 = inputs.analysis_d
    save = forecast_save_times(t0, inputs.horizon_days)
    drivers = member_drivers(inputs.forecast_drivers, states.shape[0])
    traj = simulate_with_model_error(states, spec, drivers, t0, inputs.horizon_days, params=params or None,
                                     log_sd_per_d=inputs.filter.model_error_log_sd_per_d,
                                     floor_ugL=inputs.filter.state_floor_ugL, seed=forecast_seed(inputs))
    return daily_forecasts(save, traj, spec, t0, inputs.horizon_days, inputs.thresholds_ugL)


def forecast_save_times(t0_d: float, horizon_days: int) -> np.ndarray:
    """The forecast's saved times: hourly from ``t0_d`` to the horizon [epoch days]."""
    return t0_d + np.arange(0, 24 * horizon_days + 1) / 24.0


def daily_forecasts(save_d: np.ndarray, traj: np.ndarray, spec: ModelSpec, t0_d: float, horizon_days: int,
                    thresholds_ugL) -> dict:
    """Daily statistics of every forecast quantity of a trajectory (S, M, n_state) [µg/L];
    alert-level probabilities for the alerting quantity only."""
    series = quantity_series(traj, spec)
    return {q: daily_statistics(save_d, series[q], t0_d, horizon_days,
                                thresholds_ugL if q == alerts.QUANTITY else ())
            for q in QUANTITIES}


def forecast_seed(inputs: CycleInputs) -> list[int]:
    """Seed of the forecast's model-error draws: the cycle's seed and its analysis hour (a paired
    what-if run uses the same)."""
    return [inputs.seed, int(round(inputs.analysis_d * 24))]


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
                if k == 0 and fc.horizon_exceedance is not None:
                    for level in range(fc.horizon_exceedance.shape[1]):
                        yield basin, valid, quantity, f"p_horizon_level_{level + 1}", fc.horizon_exceedance[b, level]


def member_rows(outputs: CycleOutputs):
    """(basin, quantity, forecaster, observed variable, members (days, M)) stored for verification."""
    yield from outputs.verification_members


def record(engine: Engine, config: Config, outputs: CycleOutputs, *, now: dt.datetime | None = None,
           guard: Callable[[Connection], None] | None = None, available: Availability | None = None) -> dict:
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
    the ensemble's first-guess spread settles on the readings. ``available``
    (a replay): the observed alert level from the readings available by then.
    """
    wb = config.water_body(outputs.water_body_id)
    analysis = from_epoch_days(outputs.analysis_d)
    observed = latest_observed(engine, config, wb, analysis, available=available) if outputs.forecasts else {}
    with engine.begin() as conn:
        if guard is not None:
            guard(conn)
        return record_in(conn, config, outputs, observed, now=now)


def record_in(conn: Connection, config: Config, outputs: CycleOutputs, observed: dict[str, float | None],
              *, now: dt.datetime | None = None) -> dict:
    """The writes of :func:`record` in the caller's transaction; ``observed``: the observed level per
    basin (:func:`monitor.forecasting.observed_level.latest_observed`)."""
    wb = config.water_body(outputs.water_body_id)
    analysis = from_epoch_days(outputs.analysis_d)
    message = outputs.message
    warm = store.runs_since_cold_start(conn, wb.id, analysis, config.filter.spin_up_cycles,
                                       dt.timedelta(days=config.filter.cold_start_gap_days)) \
        >= config.filter.spin_up_cycles
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
