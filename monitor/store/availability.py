"""Which stored readings were available at a time, in a replay of a stored history.

A replay has no arrival times: a station's ``reporting_delay_days`` stands for
them, so a reading counts as available at its time stamp plus its station's
delay (lab results typically days after sampling). One :class:`Availability`
is handed to every read a replayed cycle makes — the filter's observations,
the observed drivers and their substitutes, the observed history of the
baselines and the blend's record, the observed alert level — so a reading is
invisible to all of them before it became available, not only to the filter.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from dataclasses import dataclass, field

import pandas as pd
from sqlalchemy import and_, or_
from sqlalchemy.sql.elements import ColumnElement

from monitor.timeutil import aware_utc


@dataclass(frozen=True)
class Availability:
    """Readings available at ``at`` (aware UTC): time stamp + the station's delay [d] at or before ``at``.

    ``delays_d``: reporting delay in days per station id; stations not in it have none.
    """

    at: dt.datetime
    delays_d: Mapping[str, float] = field(default_factory=dict)

    def __post_init__(self) -> None:
        object.__setattr__(self, "at", aware_utc(self.at, "at"))
        object.__setattr__(self, "delays_d", {s: float(d) for s, d in self.delays_d.items() if d > 0})

    def latest_time(self, station_id: str) -> dt.datetime:
        """The latest time stamp of ``station_id`` available at ``at``."""
        return self.at - dt.timedelta(days=self.delays_d.get(station_id, 0.0))

    def condition(self, station_column, time_column) -> ColumnElement:
        """SQL condition on a readings table's station and time columns: available at ``at``.

        One term per distinct delay (not per station), so a query over many water bodies' stations
        stays short."""
        by_delay: dict[float, list[str]] = {}
        for s, d in sorted(self.delays_d.items()):
            by_delay.setdefault(d, []).append(s)
        delayed = [or_(station_column.not_in(ids), time_column <= self.at - dt.timedelta(days=d))
                   for d, ids in sorted(by_delay.items())]
        return and_(time_column <= self.at, *delayed)

    def filter(self, frame: pd.DataFrame) -> pd.DataFrame:
        """The rows of ``frame`` (columns ``station_id`` and ``time_utc``, tz-aware) available at ``at``."""
        if frame.empty:
            return frame
        delay = pd.to_timedelta(frame.station_id.map(self.delays_d).fillna(0.0).to_numpy(dtype=float), unit="D")
        return frame[(frame.time_utc + delay) <= pd.Timestamp(self.at)]
