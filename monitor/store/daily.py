"""Daily means of stored readings, aggregated in the database.

A day window ends at ``anchor + n days`` and holds the times in
(end − 1 d, end] — the windows of :func:`assimilation.forecast.daily_statistics`
for a forecast issued at ``anchor`` (or any whole number of days from it).
Aggregating in SQL keeps a season of 15-minute readings to a few hundred
rows per station and variable. Times are taken to the whole second (a reading
a fraction of a second after a window's end counts in the earlier window).
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable

import pandas as pd
from sqlalchemy import BigInteger, Integer, and_, cast, func, literal, select
from sqlalchemy.engine import Engine

from monitor.store.schema import readings
from monitor.timeutil import UTC

SECONDS_PER_DAY = 86_400
#: Days added before integer division so that every window index is positive (SQL integer
#: division truncates toward zero); covers times up to this many days before the anchor.
_OFFSET_DAYS = 1_000_000

COLUMNS = ["station_id", "variable", "day_end_utc", "value", "n"]


def _epoch_seconds(engine: Engine):
    """SQL expression: ``readings.time_utc`` as whole seconds since 1970-01-01Z."""
    if engine.dialect.name == "sqlite":
        return cast(func.strftime("%s", readings.c.time_utc), Integer)
    return cast(func.floor(func.extract("epoch", readings.c.time_utc)), BigInteger)


def daily_means(engine: Engine, *, stations: Iterable[str], variables: Iterable[str], anchor: dt.datetime,
                start: dt.datetime, end: dt.datetime, max_flag: int = 1) -> pd.DataFrame:
    """Mean and count of the readings with ``qc_flag <= max_flag`` per station, variable and day window.

    Readings in (start, end]; ``anchor`` (aware) fixes the windows' time of day.
    Columns ``COLUMNS``; ``day_end_utc`` is tz-aware UTC. Missing values
    (NULL) are not counted.
    """
    a = int(anchor.timestamp())
    s = _epoch_seconds(engine)
    index = ((s - literal(a) + literal(_OFFSET_DAYS * SECONDS_PER_DAY + SECONDS_PER_DAY - 1))
             // literal(SECONDS_PER_DAY)) - literal(_OFFSET_DAYS)
    index = index.label("window")
    q = (select(readings.c.station_id, readings.c.variable, index, func.avg(readings.c.value),
                func.count(readings.c.value))
         .where(and_(readings.c.station_id.in_(list(stations)), readings.c.variable.in_(list(variables)),
                     readings.c.qc_flag <= int(max_flag), readings.c.value.is_not(None),
                     readings.c.time_utc > start, readings.c.time_utc <= end))
         .group_by(readings.c.station_id, readings.c.variable, index))
    with engine.connect() as conn:
        rows = conn.execute(q).all()
    if not rows:
        return pd.DataFrame({c: pd.Series([], dtype=t) for c, t in
                             zip(COLUMNS, (object, object, "datetime64[ns, UTC]", float, "int64"))})
    st, var, win, mean, n = zip(*rows)
    ends = pd.to_datetime([a + int(w) * SECONDS_PER_DAY for w in win], unit="s", utc=True)
    return pd.DataFrame({"station_id": list(st), "variable": list(var), "day_end_utc": ends,
                         "value": [float(m) for m in mean], "n": [int(k) for k in n]}
                        ).sort_values(["station_id", "variable", "day_end_utc"], ignore_index=True)


def anchor_of(analysis: dt.datetime) -> dt.datetime:
    """An aware UTC anchor for ``analysis`` (its own time: windows end at its time of day)."""
    return analysis.astimezone(UTC)
