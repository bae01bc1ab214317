"""Late readings: those that arrived after the cycle that covered their time, re-analysed.

Live, a reading is late when it was received after the checkpoint that
covered its time (:func:`late_restart`). A replay has no arrival times: a
station's ``reporting_delay_days`` stands for them, so a reading counts as
available at its time plus that delay (:func:`replay_availability`), and
one that became available since the newest checkpoint is re-analysed the
same way (:func:`delayed_restart`).
"""

from __future__ import annotations

import datetime as dt

from sqlalchemy.engine import Engine

from monitor.config import Config, WaterBodyConfig
from monitor.forecasting.observations import OBSERVED_VARIABLES
from monitor.store import runs as store
from monitor.store.availability import Availability
from monitor.store.late import checkpoint_created, late_readings
from monitor.store.readings import readings_frame
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


def replay_availability(config: Config, analysis: dt.datetime) -> Availability:
    """What a replayed cycle at ``analysis`` may see: each reading from its time plus its station's
    ``reporting_delay_days`` (every station that declares one)."""
    return Availability(analysis, {s.id: s.reporting_delay_days for s in config.stations if s.reporting_delay_days > 0})


def delayed_restart(engine: Engine, config: Config, wb: WaterBodyConfig, analysis: dt.datetime,
                    found: tuple[dt.datetime, bytes]) -> tuple[tuple[dt.datetime, bytes], str]:
    """In a replay: the checkpoint to start from when readings stamped at or before the newest
    checkpoint became available (time + reporting delay) after it, within ``late_window_days``.
    Returns (checkpoint, message) like :func:`late_restart`."""
    now = replay_availability(config, analysis)
    stations = [s.id for s in config.stations_of(wb.id) if s.basin and s.id in now.delays_d]
    if not stations:
        return found, ""
    window_start = analysis - dt.timedelta(days=config.filter.late_window_days)
    max_flag = 3 if config.filter.assimilate_suspect else 1
    frame = readings_frame(engine, stations=stations, variables=OBSERVED_VARIABLES, start=window_start,
                           end=found[0], max_flag=max_flag, include_censored=True, available=now)
    # available now, but not yet when the newest checkpoint was made
    late = frame.drop(index=replay_availability(config, found[0]).filter(frame).index)
    if late.empty:
        return found, ""
    earliest = late.time_utc.min().to_pydatetime()
    earlier = store.latest_checkpoint(engine, wb.id, at_or_before=earliest - dt.timedelta(seconds=1))
    if earlier is None:
        return found, f"{len(late)} readings reported late from {earliest:%Y-%m-%d %H:%M} UTC: no checkpoint before them"
    return earlier, (f"re-analysed from {earlier[0]:%Y-%m-%d %H:%M} UTC for {len(late)} readings reported late "
                     f"(earliest {earliest:%Y-%m-%d %H:%M} UTC)")
