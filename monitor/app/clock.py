"""The service clock: the wall clock, or a fast-forwarded one for rehearsals and tests.

A :class:`ServiceClock` maps wall-clock time to service time:
``service = start + speed · (wall − anchor)``. With no ``start`` it is the
wall clock itself. Every job reads the service time from it, and
:class:`ClockTrigger` lets APScheduler's own triggers (a daily cron, an
interval) run in service time, so the real scheduler can replay a season
in minutes: a restarted process given the same ``start``, ``speed`` and
``anchor`` continues the same service time, and the time it was down
passes as downtime does.
"""

from __future__ import annotations

import datetime as dt
import math
import time

from apscheduler.triggers.base import BaseTrigger

from monitor.timeutil import UTC, now_utc


class ServiceClock:
    """Service time [aware UTC] as a function of the wall clock; ``speed`` service seconds per wall second."""

    def __init__(self, start: dt.datetime | None = None, *, speed: float = 1.0, anchor: float | None = None):
        if start is not None and start.tzinfo is None:
            raise ValueError("start must be an aware datetime (UTC)")
        if not speed > 0:
            raise ValueError(f"speed must be positive, got {speed!r}")
        self.start = start
        self.speed = float(speed) if start is not None else 1.0
        self.anchor = dt.datetime.fromtimestamp(time.time() if anchor is None else anchor, UTC)

    @property
    def is_wall_clock(self) -> bool:
        return self.start is None

    def __call__(self) -> dt.datetime:
        """The service time now."""
        if self.start is None:
            return now_utc()
        return self.to_service(dt.datetime.now(UTC))

    def to_service(self, wall: dt.datetime) -> dt.datetime:
        """A wall-clock time as service time."""
        if self.start is None:
            return wall
        return self.start + (wall - self.anchor) * self.speed

    def to_wall(self, service: dt.datetime) -> dt.datetime:
        """A service time as the wall-clock time it happens at, rounded up to the microsecond (so a job
        fired then reads a service time no earlier than ``service``)."""
        if self.start is None:
            return service
        us = (service - self.start) // dt.timedelta(microseconds=1)
        return self.anchor + dt.timedelta(microseconds=math.ceil(us / self.speed))

    def wall_seconds(self, service_seconds: float) -> float:
        """A duration in service time as wall-clock seconds [s]."""
        return service_seconds / self.speed


def _whole_second(t: dt.datetime) -> dt.datetime:
    """``t`` rounded to the nearest second: undoes the microseconds a wall↔service round trip adds."""
    return (t + dt.timedelta(microseconds=500_000)).replace(microsecond=0)


class ClockTrigger(BaseTrigger):
    """An APScheduler trigger (cron, interval …) evaluated in service time and fired at the matching wall time.

    APScheduler's documented extension point: ``get_next_fire_time`` gets
    and returns wall-clock times; the wrapped trigger sees service times.
    With the wall clock this is the wrapped trigger itself.
    """

    __slots__ = ("clock", "trigger")

    def __init__(self, clock: ServiceClock, trigger: BaseTrigger):
        self.clock = clock
        self.trigger = trigger

    def get_next_fire_time(self, previous_fire_time, now):
        if self.clock.is_wall_clock:
            return self.trigger.get_next_fire_time(previous_fire_time, now)
        previous = _whole_second(self.clock.to_service(previous_fire_time)) if previous_fire_time else None
        nxt = self.trigger.get_next_fire_time(previous, self.clock.to_service(now))
        return None if nxt is None else self.clock.to_wall(nxt)

    def __str__(self) -> str:
        return str(self.trigger) if self.clock.is_wall_clock else f"{self.trigger} in service time"

    def __repr__(self) -> str:
        return f"<ClockTrigger {self.trigger!r}>"
