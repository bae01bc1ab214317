"""Daily means of stored readings, aggregated in the database.

A day window ends at ``anchor + n days`` and holds the times in
(end − 1 d, end] — the windows of :func:`assimilation.forecast.daily_statistics`
for a forecast issued at ``anchor`` (or any whole number of days from it).
Aggregating in SQL keeps a season of 15-minute readings to a few hundred
rows per station and variable. Times are taken to the whole second (a reading
a fraction of a second after a window's end counts in the earlier window).

Censored readings (below a detection limit) have no value and never enter a
mean. With ``with_censored`` each window also says how many there were and
the largest of their detection limits, the "below this" information a
window holds beside (or instead of) its plain values.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable

import numpy as np
import pandas as pd
from sqlalchemy import BigInteger, Integer, and_, case, cast, func, literal, or_, select
from sqlalchemy.engine import Engine

from monitor.store.availability import Availability
from monitor.store.schema import readings
from monitor.timeutil import UTC

SECONDS_PER_DAY = 86_400
#: Days added before integer division so that every window index is positive (SQL integer
#: division truncates toward zero); covers times up to this many days before the anchor.
_OFFSET_DAYS = 1_000_000

COLUMNS = ["station_id", "variable", "day_end_utc", "value", "n"]
CENSORED_COLUMNS = ["n_censored", "detection_limit"]


def _epoch_seconds(engine: Engine):
    """SQL expression: ``readings.time_utc`` as whole seconds since 1970-01-01Z."""
    if engine.dialect.name == "sqlite":
        return cast(func.strftime("%s", readings.c.time_utc), Integer)
    return cast(func.floor(func.extract("epoch", readings.c.time_utc)), BigInteger)


def daily_means(engine: Engine, *, stations: Iterable[str], variables: Iterable[str], anchor: dt.datetime,
                start: dt.datetime, end: dt.datetime, max_flag: int = 1,
                with_censored: bool = False, available: Availability | None = None) -> pd.DataFrame:
    """Mean and count of the readings with ``qc_flag <= max_flag`` per station, variable and day window.

    Readings in (start, end]; ``anchor`` (aware) fixes the windows' time of day.
    Columns ``COLUMNS``; ``day_end_utc`` is tz-aware UTC. Missing values
    (NULL) and censored readings are not counted. With ``with_censored`` the
    columns ``CENSORED_COLUMNS`` follow: ``n_censored``, the censored
    readings in the window (whatever their QC flag), and
    ``detection_limit``, the largest of their known limits [canonical unit]
    (NaN when none is known); a window holding only censored readings then
    has a row too, with value NaN and n 0. ``available``: only the readings
    available then (a replay's reporting delays, :mod:`monitor.store.availability`).
    """
    a = int(anchor.timestamp())
    s = _epoch_seconds(engine)
    index = ((s - literal(a) + literal(_OFFSET_DAYS * SECONDS_PER_DAY + SECONDS_PER_DAY - 1))
             // literal(SECONDS_PER_DAY)) - literal(_OFFSET_DAYS)
    index = index.label("window")
    r = readings.c
    plain = and_(r.censored == 0, r.qc_flag <= int(max_flag), r.value.is_not(None))
    where = [r.station_id.in_(list(stations)), r.variable.in_(list(variables)), r.time_utc > start, r.time_utc <= end]
    if available is not None:
        where.append(available.condition(r.station_id, r.time_utc))
    columns = [r.station_id, r.variable, index]
    if with_censored:
        where.append(or_(plain, r.censored != 0))
        columns += [func.avg(case((plain, r.value))), func.count(case((plain, r.value))),
                    func.sum(case((r.censored != 0, 1), else_=0)), func.max(case((r.censored != 0, r.detection_limit)))]
    else:
        where.append(plain)
        columns += [func.avg(r.value), func.count(r.value)]
    q = select(*columns).where(and_(*where)).group_by(r.station_id, r.variable, index)
    with engine.connect() as conn:
        rows = conn.execute(q).all()
    names = COLUMNS + (CENSORED_COLUMNS if with_censored else [])
    if not rows:
        kinds = (object, object, "datetime64[ns, UTC]", float, "int64", "int64", float)
        return pd.DataFrame({c: pd.Series([], dtype=t) for c, t in zip(names, kinds)})
    cols = list(zip(*rows))
    st, var, win, mean, n = cols[:5]
    ends = pd.to_datetime([a + int(w) * SECONDS_PER_DAY for w in win], unit="s", utc=True)
    frame = pd.DataFrame({"station_id": list(st), "variable": list(var), "day_end_utc": ends,
                          "value": [np.nan if m is None else float(m) for m in mean], "n": [int(k) for k in n]})
    if with_censored:
        frame["n_censored"] = [int(k or 0) for k in cols[5]]
        frame["detection_limit"] = [np.nan if x is None else float(x) for x in cols[6]]
    return frame.sort_values(["station_id", "variable", "day_end_utc"], ignore_index=True)


def anchor_of(analysis: dt.datetime) -> dt.datetime:
    """An aware UTC anchor for ``analysis`` (its own time: windows end at its time of day)."""
    return analysis.astimezone(UTC)
