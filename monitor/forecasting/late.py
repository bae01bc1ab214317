"""Late readings: those that arrived after the cycle that covered their time, re-analysed."""

from __future__ import annotations

import datetime as dt

from sqlalchemy.engine import Engine

from monitor.config import Config, WaterBodyConfig
from monitor.forecasting.observations import OBSERVED_VARIABLES
from monitor.store import runs as store
from monitor.store.late import checkpoint_created, late_readings
from monitor.timeutil import EPOCH


def late_restart(engine: Engine, config: Config, wb: WaterBodyConfig, analysis: dt.datetime,
                 found: tuple[dt.datetime, bytes]) -> tuple[tuple[dt.datetime, bytes], str]:
    """The checkpoint to start from when readings arrived after the cycle that covered their time.

    Late readings (stamped at or before the newest checkpoint, received after
    it was stored) within ``late_window_days`` are assimilated by restarting
    from the newest checkpoint before the earliest of them and re-analysing
    forward; issued runs stay as issued. Returns (checkpoint, message).
    """
    created = checkpoint_created(engine, wb.id, found[0])
    if created is None:
        return found, ""
    window_start = analysis - dt.timedelta(days=config.filter.late_window_days)
    stations = [s.id for s in config.stations_of(wb.id) if s.basin]
    max_flag = 3 if config.filter.assimilate_suspect else 1
    n_all, _ = late_readings(engine, stations=stations, variables=OBSERVED_VARIABLES, start=EPOCH,
                             covered_until=found[0], received_after=created, max_flag=max_flag)
    n, earliest = late_readings(engine, stations=stations, variables=OBSERVED_VARIABLES, start=window_start,
                                covered_until=found[0], received_after=created, max_flag=max_flag)
    older = f"; {n_all - n} late readings older than {config.filter.late_window_days:g} days not assimilated" \
        if n_all > n else ""
    if not n:
        return found, older.removeprefix("; ")
    earlier = store.latest_checkpoint(engine, wb.id, at_or_before=earliest - dt.timedelta(seconds=1))
    if earlier is None or earlier[0] < window_start - dt.timedelta(days=1):
        return found, f"{n} late readings from {earliest:%Y-%m-%d %H:%M} UTC: no checkpoint before them{older}"
    return earlier, (f"re-analysed from {earlier[0]:%Y-%m-%d %H:%M} UTC for {n} late readings "
                     f"(earliest {earliest:%Y-%m-%d %H:%M} UTC){older}")
