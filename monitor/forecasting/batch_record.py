"""The record step for many water bodies at once: one transaction per batch, a savepoint per water body.

:func:`monitor.forecasting.cycle.record` commits each water body's
checkpoint, run, alerts and messages in a transaction of its own, after a
query for the observed level. :func:`record_many` reads the observed levels
of the whole batch in one query and writes the batch in one transaction,
each water body inside a savepoint (``SAVEPOINT``/``ROLLBACK TO``): a water
body whose writes fail is rolled back alone and reported, the others
commit together. The writes of each water body are exactly those of
``cycle.record`` (:func:`monitor.forecasting.cycle.record_in`), so a batch
leaves the store as the same records one by one would; in a replay the
observed levels are read through the same
:class:`~monitor.store.availability.Availability`
(:func:`monitor.forecasting.late.replay_availability`).
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable, Sequence

from sqlalchemy.engine import Connection, Engine

from monitor.config import Config
from monitor.forecasting import cycle
from monitor.forecasting.late import replay_availability
from monitor.forecasting.observed_level import OBSERVED_LEVEL_VARIABLES, latest_observed
from monitor.store.lease import LeaseLost
from monitor.store.readings import readings_frame
from monitor.timeutil import from_epoch_days

OBSERVED_WINDOW = dt.timedelta(days=1)  # the window of latest_observed's default


def record_many(engine: Engine, config: Config, outputs: Sequence[cycle.CycleOutputs], *,
                now: dt.datetime | None = None, guard: Callable[[Connection], None] | None = None,
                replay: bool = False) -> list[dict | Exception]:
    """Record each of ``outputs`` as :func:`cycle.record` would, in one transaction; returns per output its
    summary or the exception that rolled its writes back. ``guard(conn)`` runs first and its refusal
    (:class:`~monitor.store.lease.LeaseLost`) is raised: no water body is then recorded. ``replay``: the
    observed alert levels from the readings available at each analysis (``cycle.record``'s ``available``)."""
    if not outputs:
        return []
    observed = _observed_levels(engine, config, outputs, replay=replay)
    results: list[dict | Exception] = []
    with engine.begin() as conn:
        if guard is not None:
            guard(conn)
        for out, level in zip(outputs, observed):
            try:
                with conn.begin_nested():
                    results.append(cycle.record_in(conn, config, out, level, now=now))
            except LeaseLost:
                raise
            except Exception as exc:  # noqa: BLE001 - rolled back to its savepoint; the others go on
                results.append(exc)
    return results


def _observed_levels(engine: Engine, config: Config, outputs: Sequence[cycle.CycleOutputs], *,
                     replay: bool = False) -> list[dict]:
    """:func:`latest_observed` of each output with a forecast, from one readings query per analysis time
    (in a replay, of the readings available then)."""
    by_time: dict[float, list[str]] = {}
    for out in outputs:
        if out.forecasts:
            wb = config.water_body(out.water_body_id)
            by_time.setdefault(out.analysis_d, []).extend(s.id for s in config.stations_of(wb.id) if s.basin)
    frames = {}
    for t, stations in by_time.items():
        analysis = from_epoch_days(t)
        frames[t] = readings_frame(engine, stations=sorted(set(stations)), variables=list(OBSERVED_LEVEL_VARIABLES),
                                   start=analysis - OBSERVED_WINDOW, end=analysis, max_flag=1,
                                   available=replay_availability(config, analysis) if replay else None)
    return [latest_observed(None, config, config.water_body(out.water_body_id), from_epoch_days(out.analysis_d),
                            frame=frames[out.analysis_d]) if out.forecasts else {} for out in outputs]
