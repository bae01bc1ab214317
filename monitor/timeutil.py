"""Time at the boundary between the service (aware UTC datetimes) and the numerics (epoch days)."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd

UTC = dt.timezone.utc
EPOCH = dt.datetime(1970, 1, 1, tzinfo=UTC)
SECONDS_PER_DAY = 86400.0


def to_epoch_days(t) -> float | np.ndarray:
    """Aware datetime(s) or a pandas datetime index/series → days since 1970-01-01Z."""
    if isinstance(t, dt.datetime):
        if t.tzinfo is None:
            raise ValueError(f"naive datetime {t!r}: expected an aware UTC time")
        return (t - EPOCH).total_seconds() / SECONDS_PER_DAY
    idx = pd.DatetimeIndex(t)
    if idx.tz is None:
        raise ValueError("naive timestamps: expected aware UTC times")
    return (idx.tz_convert("UTC").as_unit("ns").asi8 / 1e9) / SECONDS_PER_DAY


def from_epoch_days(days: float) -> dt.datetime:
    """Days since 1970-01-01Z → aware UTC datetime (rounded to the second)."""
    return EPOCH + dt.timedelta(seconds=round(float(days) * SECONDS_PER_DAY))


def utc(year: int, month: int, day: int, hour: int = 0, minute: int = 0) -> dt.datetime:
    return dt.datetime(year, month, day, hour, minute, tzinfo=UTC)


def now_utc() -> dt.datetime:
    return dt.datetime.now(UTC).replace(microsecond=0)
