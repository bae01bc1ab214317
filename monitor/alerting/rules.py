"""Alert rules with hysteresis: a pure decision per basin and the store wrapper.

The rule, per basin and cycle (thresholds from the water body's config):

* level *n* **fires** when the forecast probability of reaching it,
  maximised over days 1..``horizon_days``, is at least ``warn_probability``,
  or when the latest observed cyanobacterial chlorophyll-a is at least the
  level's threshold;
* the **target** is the highest firing level (0 when none fires);
* a target above the current level **raises** the status at once;
* a target below the current level lowers it only after it has stayed below
  for ``clear_after_cycles`` consecutive cycles **and** the observed value
  (when there is one) is below the current level's threshold; the status
  then steps down to the target.

Hysteresis of this kind (raise fast, clear slowly and only when the
observations agree) follows the alert-levels frameworks' practice of
returning to a lower level only after consecutive results below the
threshold (Chorus & Welker 2021, *Toxic Cyanobacteria in Water*, 2nd ed.,
ch. 5). A cycle whose run has no forecast for the basin cannot count as
quiet: it may raise on the observation, but never advances the clearing.

:func:`evaluate_run` applies the rule to one stored forecast run, writes
``alert_status`` and ``alert_events`` and queues the emails
(:mod:`monitor.alerting.outbox`) and webhook calls
(:mod:`monitor.alerting.webhooks`) in one transaction: its own, or the
caller's when given a connection (the cycle records its checkpoint, run and
alerts together). Evaluating a run that is not newer than the last one
evaluated for the basin changes nothing, so re-running a cycle is safe.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from sqlalchemy import and_, select, update

from monitor.alerting import webhooks
from monitor.alerting.frameworks import AlertLevel
from monitor.alerting.levels import level_label
from monitor.alerting.outbox import enqueue_event
from monitor.store.schema import alert_events, alert_status, forecast_runs, forecast_values
from monitor.store.txn import Bind, begin

QUANTITY = "cyanobacteria_chlorophyll"
DAY = dt.timedelta(days=1)


@dataclass(frozen=True)
class Decision:
    """Outcome of one cycle for one basin."""

    level: int            # status after this cycle
    quiet_cycles: int     # consecutive cycles with the target below ``level``
    target: int           # highest firing level this cycle
    changed: bool
    probability: float | None  # p(max over days 1..horizon) of the level that decided
    observed_ugL: float | None
    reason: str


def _clean(x: float | None) -> float | None:
    if x is None:
        return None
    x = float(x)
    return None if math.isnan(x) else x


def target_level(p_max: Mapping[int, float], observed_ugL: float | None, levels: Sequence[AlertLevel],
                 warn_probability: float) -> tuple[int, list[str]]:
    """The highest level whose rule fires, and a sentence per firing level.

    ``p_max[n]`` is the probability [0–1] of reaching level *n* maximised
    over the forecast days 1..horizon (absent when not forecast);
    ``observed_ugL`` the latest observed cyanobacterial chlorophyll-a [µg/L].
    """
    observed_ugL = _clean(observed_ugL)
    target, why = 0, []
    for lv in levels:
        p = _clean(p_max.get(lv.number))
        reasons = []
        if p is not None and p >= warn_probability:
            reasons.append(f"forecast P(≥ {lv.chlorophyll_ugL:g} µg/L) = {p:.2f} ≥ {warn_probability:g}")
        if observed_ugL is not None and observed_ugL >= lv.chlorophyll_ugL:
            reasons.append(f"observed {observed_ugL:.2f} µg/L ≥ {lv.chlorophyll_ugL:g} µg/L")
        if reasons:
            target = max(target, lv.number)
            why.append(f"{lv.name}: " + " and ".join(reasons))
    return target, why


def decide(level: int, quiet_cycles: int, p_max: Mapping[int, float], observed_ugL: float | None, *,
           levels: Sequence[AlertLevel], warn_probability: float, clear_after_cycles: int,
           have_forecast: bool = True, clear_probability: float | None = None) -> Decision:
    """Apply the alert rule with hysteresis to one basin for one cycle (pure).

    ``level`` and ``quiet_cycles`` are the basin's status before the cycle;
    ``have_forecast`` False means this cycle produced no forecast for the
    basin (it may raise on the observation but does not count as quiet).
    Hysteresis in probability as well as in time: a level is raised at
    ``warn_probability`` but a cycle counts towards lowering it only when the
    probability has fallen below ``clear_probability`` (default half of
    ``warn_probability``); in between, the level stands and the count restarts
    (common practice for warning thresholds, so that a probability hovering
    near the threshold does not raise and clear the level again and again).
    """
    observed_ugL = _clean(observed_ugL)
    target, why = target_level(p_max, observed_ugL, levels, warn_probability)
    if target > level:
        return Decision(target, 0, target, True, _clean(p_max.get(target)), observed_ugL, "; ".join(why))
    if target == level:
        return Decision(level, 0, target, False, _clean(p_max.get(level)) if level else None,
                        observed_ugL, "; ".join(why))
    # target < level: count quiet cycles, clear only when the observation agrees
    p_current = _clean(p_max.get(level))
    if not have_forecast:
        return Decision(level, quiet_cycles, target, False, p_current, observed_ugL,
                        "no forecast this cycle: the alert is kept and the clearing count not advanced")
    clear_below = warn_probability / 2 if clear_probability is None else clear_probability
    if p_current is not None and p_current >= clear_below:
        return Decision(level, 0, target, False, p_current, observed_ugL,
                        f"{levels[level - 1].name} kept: forecast P = {p_current:.2f} is below {warn_probability:g} "
                        f"but not yet below {clear_below:g}")
    quiet = quiet_cycles + 1
    threshold = levels[level - 1].chlorophyll_ugL
    observed_below = observed_ugL is None or observed_ugL < threshold
    if quiet >= clear_after_cycles and observed_below:
        p_text = f"forecast P(≥ {threshold:g} µg/L) = {p_current:.2f}" if p_current is not None else "no forecast probability"
        obs_text = (f"observed {observed_ugL:.2f} µg/L < {threshold:g} µg/L" if observed_ugL is not None
                    else "no observation")
        reason = (f"below {levels[level - 1].name} for {quiet} consecutive cycles "
                  f"({p_text} < {warn_probability:g}; {obs_text})")
        return Decision(target, 0, target, True, p_current, observed_ugL, reason)
    return Decision(level, quiet, target, False, p_current, observed_ugL,
                    f"below {levels[level - 1].name} for {quiet} of {clear_after_cycles} cycles needed to lower")


# --------------------------------------------------------------------------
# The store wrapper


def exceedance_maxima(conn, run_id: int, analysis_utc: dt.datetime, horizon_days: int) -> dict[str, dict[int, float]]:
    """``{basin_id: {level: probability of reaching it within the horizon}}`` of one forecast run.

    The run's ``p_horizon_level_<n>`` (the fraction of members that reach the
    level on any day) where it has them; for older runs, the largest daily
    ``p_level_<n>`` over days 1..horizon (a lower bound of it).
    """
    rows = conn.execute(
        select(forecast_values.c.basin_id, forecast_values.c.valid_utc, forecast_values.c.statistic,
               forecast_values.c.value)
        .where(and_(forecast_values.c.run_id == run_id, forecast_values.c.quantity == QUANTITY,
                    forecast_values.c.statistic.like("p_%level_%"))))
    daily: dict[str, dict[int, float]] = {}
    horizon: dict[str, dict[int, float]] = {}
    for basin_id, valid_utc, statistic, value in rows:
        within = statistic.startswith("p_horizon_level_")
        suffix = statistic.rsplit("_", 1)[-1]
        if not suffix.isdigit() or value is None or math.isnan(value):
            continue
        n = int(suffix)
        if within:
            horizon.setdefault(basin_id, {})[n] = float(value)
            continue
        lead_days = round((valid_utc - analysis_utc) / DAY)
        if not 1 <= lead_days <= horizon_days:
            continue
        per_basin = daily.setdefault(basin_id, {})
        per_basin[n] = max(per_basin.get(n, 0.0), float(value))
    return {b: horizon.get(b, daily.get(b, {})) for b in set(daily) | set(horizon)}


def evaluate_run(bind: Bind, config, water_body_id: str, run_id: int,
                 observed: Mapping[str, float | None], now: dt.datetime) -> list[dict]:
    """Evaluate the alert rule for every basin of one forecast run; return the events.

    ``bind`` is an engine (own transaction) or a connection (the caller's).
    ``observed`` maps basin id to the latest QC-passed daily mean of the
    phycocyanin sensor (cyanobacterial chlorophyll-a) [µg/L] or None.
    Writes ``alert_status`` (``updated_utc`` is the analysis time of the last
    run evaluated), one ``alert_events`` row per change, the outbox emails
    and the webhook calls, all in one transaction. Each event dict carries id,
    water_body_id, basin_id, time_utc (the run's analysis time), from_level,
    to_level, level_name, probability, observed_ugL, reason, run_id, emails
    and webhooks (messages queued).
    """
    if now.tzinfo is None:
        raise ValueError("now must be an aware datetime (UTC)")
    wb = config.water_body(water_body_id)
    rule = wb.alerts
    events: list[dict] = []
    with begin(bind) as conn:
        run = conn.execute(select(forecast_runs).where(forecast_runs.c.id == run_id)).first()
        if run is None:
            raise ValueError(f"no forecast run with id {run_id}")
        if run.water_body_id != water_body_id:
            raise ValueError(f"forecast run {run_id} belongs to {run.water_body_id!r}, not {water_body_id!r}")
        t = run.analysis_utc
        maxima = exceedance_maxima(conn, run_id, t, rule.horizon_days)
        current = {r.basin_id: r for r in conn.execute(
            select(alert_status).where(alert_status.c.water_body_id == water_body_id))}
        for basin in wb.basins:
            st = current.get(basin.id)
            if st is not None and st.updated_utc >= t:
                continue  # this run (or a newer one) was already evaluated for the basin
            level = min(int(st.level), len(rule.levels)) if st is not None else 0  # levels may have been removed
            quiet = int(st.quiet_cycles) if st is not None else 0
            d = decide(level, quiet, maxima.get(basin.id, {}), observed.get(basin.id), levels=rule.levels,
                       warn_probability=rule.warn_probability, clear_after_cycles=rule.clear_after_cycles,
                       have_forecast=basin.id in maxima, clear_probability=rule.clear_probability)
            since = t if (st is None or d.changed) else st.since_utc
            values = dict(level=d.level, since_utc=since, quiet_cycles=d.quiet_cycles, updated_utc=t)
            if st is None:
                conn.execute(alert_status.insert().values(water_body_id=water_body_id, basin_id=basin.id, **values))
            else:
                conn.execute(update(alert_status).where(and_(
                    alert_status.c.water_body_id == water_body_id,
                    alert_status.c.basin_id == basin.id)).values(**values))
            if not d.changed:
                continue
            reason = f"run {run_id}: {d.reason}"
            result = conn.execute(alert_events.insert().values(
                water_body_id=water_body_id, basin_id=basin.id, time_utc=t, from_level=level,
                to_level=d.level, probability=d.probability, observed_ugL=d.observed_ugL, reason=reason))
            event = dict(id=int(result.inserted_primary_key[0]), water_body_id=water_body_id,
                         basin_id=basin.id, time_utc=t, from_level=level, to_level=d.level,
                         level_name=level_label(wb, d.level), probability=d.probability,
                         observed_ugL=d.observed_ugL, reason=reason, run_id=run_id)
            event["emails"] = enqueue_event(conn, wb, event, base_url=config.service.base_url, now=now)
            event["webhooks"] = webhooks.enqueue_alert(conn, config, wb, event, now=now)
            events.append(event)
    return events
