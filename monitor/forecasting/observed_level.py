"""The observed value an alert level is judged on, per basin."""

from __future__ import annotations

import datetime as dt

import pandas as pd
from sqlalchemy.engine import Engine

from monitor.config import Config, WaterBodyConfig
from monitor.store.availability import Availability
from monitor.store.readings import readings_frame

#: What the observed alert level is judged on, in order: phycocyanin (cyanobacteria chlorophyll-a);
#: where a basin has none, chlorophyll-a — extracted, else fluorescence — as the frameworks'
#: conservative stand-in (all chlorophyll-a counted as if cyanobacterial).
OBSERVED_LEVEL_VARIABLES = ("phycocyanin", "chlorophyll_a", "chlorophyll_fluorescence")


def latest_observed(engine: Engine | None, config: Config, wb: WaterBodyConfig, analysis: dt.datetime,
                    window: dt.timedelta = dt.timedelta(days=1), *, frame: pd.DataFrame | None = None,
                    available: Availability | None = None) -> dict[str, float | None]:
    """Mean QC-passed reading per basin over the last day [µg/L] of the first variable of
    ``OBSERVED_LEVEL_VARIABLES`` that the basin is monitored for (None without one that day); in a
    replay (``available``) of the readings available by ``analysis``.

    ``frame``: QC-passed readings (flag 1) over [analysis − window, analysis] that hold at least
    those of ``wb``'s stations, when already read (else read from ``engine``; a ``frame`` given
    in a replay must already hold only the available readings)."""
    out: dict[str, float | None] = {b.id: None for b in wb.basins}
    variable_of: dict[str, str] = {}
    stations: dict[str, str] = {}
    for b in wb.basins:
        for variable in OBSERVED_LEVEL_VARIABLES:
            ids = [s.id for s in config.stations_of(wb.id, basin=b.id, variable=variable)]
            if ids:
                variable_of[b.id] = variable
                stations.update(dict.fromkeys(ids, b.id))
                break
    if not stations:
        return out
    if frame is None:
        frame = readings_frame(engine, stations=list(stations), variables=sorted(set(variable_of.values())),
                               start=analysis - window, end=analysis, max_flag=1, available=available)
    else:
        frame = frame[frame.station_id.isin(list(stations)) & frame.variable.isin(set(variable_of.values()))]
    if not frame.empty:
        frame = frame[frame.variable == frame.station_id.map(lambda s: variable_of[stations[s]])]
        for station, value in frame.groupby("station_id").value.mean().items():
            out[stations[station]] = float(value)
    return out
