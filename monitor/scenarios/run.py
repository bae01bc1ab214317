"""Run a what-if on today's analysis of a water body, without writing anything.

Today's analysis ensemble is the newest stored checkpoint of the water body
(its members, their estimated group parameters); the forecast drivers are
gathered exactly as the cycle gathers them (:func:`monitor.forecasting.cycle.outlook_drivers`
with the members spread over the driver scenarios); the paired run and the
action's budget come from :mod:`assimilation.scenarios`; daily statistics
from :func:`monitor.forecasting.cycle.daily_forecasts`. Only the process
model's ensemble answers: the statistical baselines issued beside the
forecast cannot tell what an action would change.

Nothing here writes to the store: no checkpoint, run, alert or email comes
from a scenario (checked in tests/monitor/scenarios/test_run.py).
"""

from __future__ import annotations

import datetime as dt

import numpy as np
from sqlalchemy.engine import Engine

from assimilation import scenarios as sc
from assimilation.augmentation import split
from assimilation.checkpoint import Checkpoint
from assimilation.forcing import member_drivers
from assimilation.forecast import QUANTILES
from monitor.alerting.caution import CAUTION
from monitor.alerting.rules import QUANTITY
from monitor.config import Config, WaterBodyConfig
from monitor.config.model_setup import filter_config, model_spec
from monitor.forecasting.cycle import daily_forecasts, forecast_save_times, outlook_drivers, station_readings
from monitor.forecasting.drivers import StationSeries, surface_relaxation_days
from monitor.forecasting.history import observed_history
from monitor.forecasting.quantities import QUANTITIES, UNITS
from monitor.scenarios.request import (
    FlowAction,
    IntakeAction,
    LoadAction,
    RequestError,
    WhatIfRequest,
    action_dict,
)
from monitor.store.runs import latest_checkpoint
from monitor.timeutil import as_utc, from_epoch_days

#: What a what-if is, in every payload and on the page.
SCENARIO_NOTICE = (
    "What-if scenario: the process model's ensemble run forward from the latest analysis with the "
    "action and without it, member by member. It is a model experiment to compare options, not a "
    "forecast, not advice and not a safety clearance.")
#: Why only the process model answers.
MODEL_NOTE = (
    "Only Bloomline's process model (the nutrient–phytoplankton model behind the ensemble forecast) "
    "can answer a what-if: the statistical forecasts beside it follow past readings and cannot tell "
    "what an action would change.")
#: Readings before the analysis that the outlook drivers use (as the cycle).
OUTLOOK_READINGS = dt.timedelta(days=14)


class NoAnalysis(LookupError):
    """No analysis of the water body is stored yet."""


def _iso(t: dt.datetime) -> str:
    return as_utc(t).strftime("%Y-%m-%dT%H:%M:%SZ")


def _num(x) -> float | None:
    x = float(x)
    return x if np.isfinite(x) else None


def outlet_basin(wb: WaterBodyConfig) -> str:
    """The basin at the outlet (the last that flows out): where the intake is taken to be unless
    a what-if moves it."""
    return [b.id for b in wb.basins if b.flows_to == "outlet"][-1]


def describe(action, wb: WaterBodyConfig) -> str:
    """One plain sentence for an action."""
    names = {b.id: b.name for b in wb.basins} | {i.id: i.name for i in wb.inflows}
    if isinstance(action, IntakeAction):
        return f"Draw drinking water from {names[action.basin]}."
    if isinstance(action, LoadAction):
        parts = [f"{'nitrogen' if k == 'nitrogen_pct' else 'phosphorus'} {v:+g} %"
                 for k, v in (("nitrogen_pct", action.nitrogen_pct), ("phosphorus_pct", action.phosphorus_pct))
                 if v]
        change = " and ".join(parts) or "no change"
        return f"Change the load of {names[action.inflow]} from day {action.from_day} on: {change}."
    period = f"from day {action.from_day} for {action.days:g} day{'s' if action.days != 1 else ''}"
    if action.kind == "release":
        return (f"Release {action.flow_m3s:g} m³/s more through {names[action.basin]} {period}, "
                f"made up by the inflows that feed it.")
    temp = "" if action.temperature_C is None else f", {action.temperature_C:g} °C"
    return (f"Bring {action.flow_m3s:g} m³/s of water from elsewhere into {names[action.basin]} {period} "
            f"({action.nitrogen_ugL:g} µg N/L, {action.phosphorus_ugL:g} µg P/L{temp}).")


def _numeric_actions(request: WhatIfRequest, wb: WaterBodyConfig) -> list:
    basin = {b.id: i for i, b in enumerate(wb.basins)}
    inflow = {f.id: i for i, f in enumerate(wb.inflows)}
    out = []
    for a in request.actions:
        if isinstance(a, FlowAction) and a.kind == "release":
            out.append(sc.Release(basin[a.basin], a.flow_m3s, a.from_day - 1, a.days))
        elif isinstance(a, FlowAction):
            out.append(sc.Transfer(basin[a.basin], a.flow_m3s, a.from_day - 1, a.days, a.nitrogen_ugL,
                                   a.phosphorus_ugL, a.temperature_C))
        elif isinstance(a, LoadAction):
            out.append(sc.LoadChange(inflow[a.inflow], a.from_day - 1, a.nitrogen_pct, a.phosphorus_pct))
    return out


def _stats(fc, k: int, b: int) -> dict:
    out = {f"q{round(q * 100):02d}": _num(fc.quantiles[i, k, b]) for i, q in enumerate(QUANTILES)}
    out["mean"] = _num(fc.mean[k, b])
    return out


def _levels(p, k: int, b: int) -> dict:
    return {str(n + 1): _num(p[k, b, n]) for n in range(p.shape[2])}


def _p_max(fc, b: int) -> dict:
    """Probability of reaching each level on the most likely of days 1..H (as the alert rule reads it)."""
    return {str(n + 1): _num(fc.exceedance[1:, b, n].max()) for n in range(fc.exceedance.shape[2])}


def run_what_if(engine: Engine, config: Config, wb: WaterBodyConfig, request: WhatIfRequest, *,
                now: dt.datetime) -> dict:
    """The scenario of ``request`` from the newest analysis of ``wb`` at or before ``now`` (aware UTC),
    as a JSON-ready dict with the caution. Reads the store, never writes. NoAnalysis when no
    analysis (that fits the configuration) is stored yet; RequestError when the actions cannot be put
    into the outlook's drivers."""
    found = latest_checkpoint(engine, wb.id, at_or_before=now)
    if found is None:
        raise NoAnalysis(f"no analysis of {wb.name} is stored yet: a what-if starts from the latest "
                         f"analysis, so run a cycle first")
    analysis = as_utc(found[0])
    checkpoint = Checkpoint.from_bytes(found[1])
    spec = model_spec(wb)
    try:
        states, params, _gains = split(checkpoint, spec)
    except ValueError as exc:
        raise NoAnalysis(f"the latest analysis of {wb.name} does not fit its configuration (basins or groups "
                         f"changed since: {exc}); the next cycle makes one that does") from None
    members = min(request.members or states.shape[0], states.shape[0])
    states = states[:members]
    params = {k: v[:members] for k, v in params.items()} or None
    horizon = request.horizon_days
    series = StationSeries(station_readings(engine, config, wb, analysis - OUTLOOK_READINGS, analysis))
    drivers = member_drivers(outlook_drivers(engine, config, wb, series, analysis, horizon,
                                             history=observed_history(engine, config, wb, analysis)), members)
    t0 = checkpoint.time_d
    try:
        scenario = sc.apply_actions(spec, drivers, _numeric_actions(request, wb), t0, surface_relaxation_d=[
            surface_relaxation_days(b.mean_depth_m) for b in wb.basins])
    except ValueError as exc:   # e.g. the inflows that would make up a release are dry in the outlook
        raise RequestError(str(exc)) from None
    save = forecast_save_times(t0, horizon)
    cfg = filter_config(config, wb)   # the forecast's model error, with the cycle's own draws
    pair = sc.paired_run(states, scenario, t0, save, params=params,
                         model_error_log_sd_per_d=cfg.model_error_log_sd_per_d, floor_ugL=cfg.state_floor_ugL,
                         seed=[config.filter.seed + sum(map(ord, wb.id)), int(round(t0 * 24))])
    thresholds = tuple(lv.chlorophyll_ugL for lv in wb.alerts.levels)
    without = daily_forecasts(save, pair.without, scenario.spec, t0, horizon, thresholds)
    with_action = daily_forecasts(save, pair.with_action, scenario.spec, t0, horizon, thresholds)
    return {
        "caution": CAUTION,
        "kind": "what-if scenario",
        "notice": SCENARIO_NOTICE,
        "model": MODEL_NOTE,
        "water_body": {"id": wb.id, "name": wb.name, "use": wb.use},
        "analysis_utc": _iso(analysis),
        "horizon_days": horizon,
        "members": members,
        "request": request.as_dict(),
        "actions": [_action_entry(a, wb, analysis) for a in request.actions],
        "budget": _budget(scenario, save, horizon),
        "units": {**UNITS, "p_level_<n>": "probability 0-1", "water_m3": "m3", "nitrogen_kg": "kg N",
                  "phosphorus_kg": "kg P"},
        "levels": [{"number": lv.number, "name": lv.name, "chlorophyll_ugL": lv.chlorophyll_ugL}
                   for lv in wb.alerts.levels],
        "basins": [_basin(b, i, without, with_action, t0, horizon) for i, b in enumerate(wb.basins)],
        **({"drinking_water": _intake(wb, request, without, with_action)} if wb.use == "drinking-water" else {}),
    }


def _action_entry(action, wb: WaterBodyConfig, analysis: dt.datetime) -> dict:
    """An action as requested, in a sentence, with its period in UTC."""
    out = {**action_dict(action), "description": describe(action, wb)}
    if isinstance(action, (FlowAction, LoadAction)):
        out["start_utc"] = _iso(analysis + dt.timedelta(days=action.from_day - 1))
    if isinstance(action, FlowAction):
        out["end_utc"] = _iso(analysis + dt.timedelta(days=action.from_day - 1 + action.days))
    return out


def _budget(scenario, save, horizon: int) -> dict:
    """The action's water and nutrient loads per forecast day and in all (hourly intervals summed)."""
    b = sc.action_budget(scenario, save)
    per_day = {k: v.reshape(horizon, -1).sum(axis=1) for k, v in b.items()}
    return {"water_m3": float(b["water_m3"].sum()), "nitrogen_kg": float(b["nitrogen_kg"].sum()),
            "phosphorus_kg": float(b["phosphorus_kg"].sum()),
            "days": [{"day": k + 1, **{key: float(v[k]) for key, v in per_day.items()}} for k in range(horizon)],
            "note": ("water_m3 is the water the action moves (released from the feeding inflows' supply or "
                     "brought from elsewhere); nitrogen_kg and phosphorus_kg the change of the external "
                     "total-N and total-P loads it brings, with minus without")}


def _basin(basin, b: int, without: dict, with_action: dict, t0: float, horizon: int) -> dict:
    quantities = {}
    for q in QUANTITIES:
        f0, f1 = without[q], with_action[q]
        d = sc.paired_difference(f0, f1)
        quantities[q] = [{
            "day": k, "valid_utc": _iso(from_epoch_days(f0.day_end_d[k])),
            "without": _stats(f0, k, b), "with": _stats(f1, k, b),
            "difference": {"q05": _num(d.quantiles[0, k, b]), "q50": _num(d.quantiles[1, k, b]),
                           "q95": _num(d.quantiles[2, k, b]), "mean": _num(d.mean[k, b])},
        } for k in range(horizon + 1)]
    f0, f1 = without[QUANTITY], with_action[QUANTITY]
    return {
        "id": basin.id, "name": basin.name, "quantities": quantities,
        "levels": [{"day": k, "valid_utc": _iso(from_epoch_days(f0.day_end_d[k])),
                    "without": _levels(f0.exceedance, k, b), "with": _levels(f1.exceedance, k, b),
                    "change": _levels(f1.exceedance - f0.exceedance, k, b)} for k in range(horizon + 1)],
        "p_max_within_horizon": {"without": _p_max(f0, b), "with": _p_max(f1, b)},
    }


def _intake(wb: WaterBodyConfig, request: WhatIfRequest, without: dict, with_action: dict) -> dict:
    """The drinking-water outlook: the intake basin's chance of reaching each level within the
    horizon, as now (intake at the outlet basin, no action) and with the actions (intake moved)."""
    ids = [b.id for b in wb.basins]
    now_at = outlet_basin(wb)
    moved = request.intake.basin if request.intake else now_at
    return {
        "intake_basin": now_at, "intake_basin_with": moved,
        "p_max_within_horizon": {"without": _p_max(without[QUANTITY], ids.index(now_at)),
                                 "with": _p_max(with_action[QUANTITY], ids.index(moved))},
        "note": ("Bloomline takes the intake to be in the basin at the outlet unless the what-if moves it; "
                 "the alert rule itself keeps evaluating every basin."),
    }
