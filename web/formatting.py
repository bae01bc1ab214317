"""How pages write times, probabilities and concentrations.

Times are shown in the water body's own time zone with the zone named
(``Mon 10 Aug 2026, 08:00 UTC+02:00``). Probabilities come from an
ensemble of M members, so they are known only to 1/M: a probability
below one member's share is written ``< 2 %`` (M = 60), one above all but
one member's share ``> 98 %``; "0 %" and "100 %" would read as certainty.
One wording is used for them everywhere: "chance of reaching <level>".
"""

from __future__ import annotations

import datetime as dt
import math
from zoneinfo import ZoneInfo

DASH = "—"


def zone(tz_name: str) -> ZoneInfo:
    """The time zone of an IANA name (checked when the config was loaded)."""
    return ZoneInfo(tz_name)


def zone_label(t: dt.datetime, tz: dt.tzinfo) -> str:
    """The zone of ``t`` in ``tz`` as a reader knows it: its abbreviation when it has a
    letter one (``CEST``), else its offset from UTC (``UTC+02:00``)."""
    local = t.astimezone(tz)
    name = local.tzname() or ""
    if name.isalpha() and name.upper() != "UTC":
        return name
    offset = local.utcoffset() or dt.timedelta(0)
    minutes = int(offset.total_seconds() // 60)
    sign = "+" if minutes >= 0 else "-"
    return f"UTC{sign}{abs(minutes) // 60:02d}:{abs(minutes) % 60:02d}"


def local_time(t: dt.datetime | None, tz: dt.tzinfo, *, with_zone: bool = True) -> str:
    """``Mon 10 Aug 2026, 08:00 UTC+02:00``: an aware time in ``tz``, the zone named."""
    if t is None:
        return DASH
    text = t.astimezone(tz).strftime("%a %d %b %Y, %H:%M")
    return f"{text} {zone_label(t, tz)}" if with_zone else text


def local_date(t: dt.datetime | dt.date | None, tz: dt.tzinfo | None = None) -> str:
    """``Mon 10 Aug 2026``: the calendar day of ``t`` in ``tz`` (a date is shown as it is)."""
    if t is None:
        return DASH
    if isinstance(t, dt.datetime):
        if tz is None:
            raise ValueError("a datetime needs the time zone its day is counted in")
        t = t.astimezone(tz).date()
    return t.strftime("%a %d %b %Y")


def forecast_day(valid_utc: dt.datetime, lead_days: int, tz: dt.tzinfo) -> str:
    """The day a forecast value stands for, in ``tz``: the analysis instant for day 0, else the
    local date of the middle of the 24 hours ending at ``valid_utc``."""
    if lead_days <= 0:
        return local_time(valid_utc, tz, with_zone=False)
    return local_date(valid_utc - dt.timedelta(hours=12), tz)


def duration(delta: dt.timedelta | None) -> str:
    """A length of time in words, to the hour: ``3 days 4 hours``, ``5 hours``."""
    if delta is None:
        return DASH
    hours = max(0, int(delta.total_seconds() // 3600))
    days, hours = divmod(hours, 24)
    parts = []
    if days:
        parts.append(f"{days} day{'s' if days != 1 else ''}")
    if hours or not days:
        parts.append(f"{hours} hour{'s' if hours != 1 else ''}")
    return " ".join(parts)


def chance(p: float | None, members: int) -> str:
    """A forecast probability at the resolution of an ensemble of ``members``.

    Under half a member's share: ``< ⌈100/M⌉ %``; over all but half a
    member's share: ``> 100 − ⌈100/M⌉ %``; otherwise whole per cent.
    """
    if p is None or (isinstance(p, float) and math.isnan(p)):
        return DASH
    if members < 1:
        raise ValueError(f"an ensemble has at least one member, got {members}")
    step = math.ceil(100 / members)
    if p * members < 0.5:
        return f"< {step} %"
    if p * members > members - 0.5:
        return f"> {100 - step} %"
    return f"{min(max(round(100 * p), step), 100 - step)} %"


def concentration(x: float | None) -> str:
    """A concentration [µg/L] to a sensible number of digits (none shown as a dash)."""
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return DASH
    return f"{x:.2f}" if abs(x) < 10 else f"{x:.1f}"


def reading(x: float | None, unit: str) -> str:
    """A reading with its unit, written as a person would (µg/L, °C, m³/s)."""
    if x is None:
        return "missing"
    shown = {"ug/L": "µg/L", "degC": "°C", "m3/s": "m³/s", "W/m2": "W/m²"}.get(unit, unit)
    return f"{concentration(x)} {shown}".strip()
