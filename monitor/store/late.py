"""Readings that arrived after the cycle that covered their time: what a late-reading re-analysis needs."""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable

from sqlalchemy import and_, func, select
from sqlalchemy.engine import Engine

from monitor.store.schema import checkpoints, ingest_batches, readings


def checkpoint_created(engine: Engine, water_body_id: str, time_utc: dt.datetime) -> dt.datetime | None:
    """When the checkpoint of ``water_body_id`` at ``time_utc`` was stored (None if there is none)."""
    with engine.connect() as conn:
        return conn.execute(select(checkpoints.c.created_at).where(
            (checkpoints.c.water_body_id == water_body_id) & (checkpoints.c.time_utc == time_utc))).scalar()


def _late(stations: Iterable[str], variables: Iterable[str], start: dt.datetime | None, covered_until: dt.datetime,
          received_after: dt.datetime, max_flag: int):
    """The conditions of a late reading (see :func:`late_readings`)."""
    cond = [readings.c.station_id.in_(list(stations)), readings.c.variable.in_(list(variables)),
            readings.c.qc_flag <= int(max_flag), readings.c.value.is_not(None),
            readings.c.time_utc <= covered_until, ingest_batches.c.received_at > received_after]
    if start is not None:
        cond.append(readings.c.time_utc >= start)
    return and_(*cond)


def late_readings(engine: Engine, *, stations: Iterable[str], variables: Iterable[str], start: dt.datetime,
                  covered_until: dt.datetime, received_after: dt.datetime, max_flag: int = 1
                  ) -> tuple[int, dt.datetime | None]:
    """(count, earliest time) of readings stamped in [start, covered_until] whose batch was received
    after ``received_after`` (the time the covering cycle stored its checkpoint)."""
    q = (select(func.count(), func.min(readings.c.time_utc))
         .select_from(readings.join(ingest_batches, readings.c.batch_id == ingest_batches.c.id))
         .where(_late(stations, variables, start, covered_until, received_after, max_flag)))
    with engine.connect() as conn:
        n, earliest = conn.execute(q).one()
    if earliest is not None and earliest.tzinfo is None:
        earliest = earliest.replace(tzinfo=dt.UTC)
    return int(n or 0), earliest


def stations_with_late_readings(engine: Engine, *, stations: Iterable[str], variables: Iterable[str],
                                covered_until: dt.datetime, received_after: dt.datetime, max_flag: int = 1
                                ) -> set[str]:
    """The ``stations`` with a reading stamped at or before ``covered_until`` whose batch was received
    after ``received_after`` (:func:`late_readings` of any start), in one query: with the latest
    ``covered_until`` and earliest ``received_after`` of many water bodies, a superset of those whose
    late readings need a look."""
    q = (select(readings.c.station_id).distinct()
         .select_from(readings.join(ingest_batches, readings.c.batch_id == ingest_batches.c.id))
         .where(_late(stations, variables, None, covered_until, received_after, max_flag)))
    with engine.connect() as conn:
        return {row[0] for row in conn.execute(q)}
