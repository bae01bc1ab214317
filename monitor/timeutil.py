"""Bloomline's one representation of time, and every conversion between its forms.

* At the edges (config, store, web, alerts, the command line): aware
  ``datetime`` objects in UTC. A naive datetime is refused wherever a time
  enters, except where the store itself hands back naive UTC (:func:`as_utc`).
* Inside ingest and QC: int64 nanoseconds since 1970-01-01T00:00Z ("ns").
* Inside ``assimilation``: float days since 1970-01-01T00:00Z ("epoch days").
* In the database: naive UTC (:class:`monitor.store.schema.UTCDateTime`);
  SQLite keeps it as text ``"YYYY-MM-DD HH:MM:SS.ffffff"``
  (:func:`db_times`, :func:`ns_from_db`).
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable

import numpy as np
import pandas as pd

UTC = dt.UTC
EPOCH = dt.datetime(1970, 1, 1, tzinfo=UTC)
SECONDS_PER_DAY = 86400.0
NS_PER_SECOND = 1_000_000_000
NS_PER_HOUR = 3600 * NS_PER_SECOND
NS_PER_DAY = 24 * NS_PER_HOUR


# --------------------------------------------------------------------------
# Aware UTC datetimes (the edges)


def utc(year: int, month: int, day: int, hour: int = 0, minute: int = 0) -> dt.datetime:
    """The aware UTC datetime of a calendar date and time of day."""
    return dt.datetime(year, month, day, hour, minute, tzinfo=UTC)


def now_utc() -> dt.datetime:
    """The current time, aware UTC, to the second."""
    return dt.datetime.now(UTC).replace(microsecond=0)


def as_utc(t: dt.datetime) -> dt.datetime:
    """A datetime as aware UTC; a naive one is taken to be UTC already (as the store returns it)."""
    return t.replace(tzinfo=UTC) if t.tzinfo is None else t.astimezone(UTC)


def naive_utc(t: dt.datetime) -> dt.datetime:
    """Aware datetime → naive UTC (as the store keeps it); a naive one is refused."""
    if t.tzinfo is None:
        raise ValueError(f"naive datetime {t!r}: expected an aware UTC time")
    return t.astimezone(UTC).replace(tzinfo=None)


def aware_utc(t, name: str = "time") -> dt.datetime | None:
    """Any time pandas can read (datetime, Timestamp, ISO 8601 text) with an offset → aware UTC datetime.

    ``None`` stays ``None``; a time without an offset is refused with a
    message naming ``name``.
    """
    if t is None:
        return None
    t = pd.Timestamp(t)
    if t.tzinfo is None:
        raise ValueError(f"{name} must be an aware datetime (UTC), got naive {t!r}")
    return t.tz_convert("UTC").to_pydatetime()


def parse_utc(text: str) -> dt.datetime:
    """ISO 8601 text → aware UTC datetime; a time without an offset is UTC."""
    return as_utc(dt.datetime.fromisoformat(text))


# --------------------------------------------------------------------------
# Epoch days (assimilation)


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


# --------------------------------------------------------------------------
# int64 nanoseconds (ingest and QC)


def ns_from_datetime(t: dt.datetime) -> int:
    """Aware datetime → ns since 1970-01-01Z; a naive one is refused."""
    if t.tzinfo is None:
        raise ValueError(f"naive datetime {t!r}: expected an aware UTC time")
    return int(pd.Timestamp(t).tz_convert("UTC").value)


def datetime_from_ns(ns: int) -> dt.datetime:
    """ns since 1970-01-01Z → aware UTC datetime (microseconds: the sub-microsecond part is dropped)."""
    return pd.Timestamp(int(ns), tz="UTC").to_pydatetime()


def ns_from_hours(hours: float) -> int:
    """A duration [h] → [ns], truncated to a whole nanosecond."""
    return int(hours * NS_PER_HOUR)


def ns_from_days(days: float) -> int:
    """A duration [d] → [ns], truncated to a whole nanosecond."""
    return int(days * 24 * NS_PER_HOUR)


def hours_from_ns(ns) -> np.ndarray:
    """Durations [ns] (int64 array or scalar) → [h] as floats."""
    return np.asarray(ns) / NS_PER_HOUR


# --------------------------------------------------------------------------
# The store's time columns (naive UTC)


def db_times(ns: np.ndarray, dialect: str) -> list:
    """int64 ns UTC → the values the driver of ``dialect`` binds for a UTCDateTime column.

    SQLite: text in SQLAlchemy's storage format ``"YYYY-MM-DD HH:MM:SS.ffffff"``;
    other dialects: naive UTC datetimes. Microseconds: the sub-microsecond
    part is dropped.
    """
    ns = np.asarray(ns, dtype=np.int64)
    if ns.size == 0:
        return []
    uniq, inverse = np.unique(ns, return_inverse=True)
    us = uniq.astype("datetime64[ns]").astype("datetime64[us]")
    if dialect == "sqlite":
        text = np.char.replace(np.datetime_as_string(us, unit="us").astype(str), "T", " ")
        return text[inverse].tolist()
    objs = np.array(us.tolist(), dtype=object)
    return objs[inverse].tolist()


def ns_from_db(values: Iterable, dialect: str) -> np.ndarray:
    """Stored UTCDateTime values (text in SQLite, datetimes elsewhere) → int64 ns UTC."""
    vals = list(values)
    if not vals:
        return np.array([], dtype=np.int64)
    if dialect == "sqlite" and isinstance(vals[0], str):
        idx = pd.to_datetime(pd.Series(vals), format="ISO8601")
    else:
        idx = pd.to_datetime(pd.Series(vals))
    if getattr(idx.dt, "tz", None) is not None:
        idx = idx.dt.tz_convert("UTC").dt.tz_localize(None)
    return idx.astype("datetime64[ns]").to_numpy().astype(np.int64)


def utc_series_from_db(values: Iterable) -> pd.Series:
    """Stored UTCDateTime values (aware datetimes after SQLAlchemy, or raw SQLite text) → tz-aware UTC timestamps."""
    vals = list(values)
    if vals and isinstance(vals[0], str):  # raw SQLite text, naive UTC
        s = pd.to_datetime(pd.Series(vals), format="ISO8601", utc=True)
    else:
        s = pd.to_datetime(pd.Series(vals, dtype=object), utc=True)
    return s.astype("datetime64[ns, UTC]") if len(s) else pd.Series([], dtype="datetime64[ns, UTC]")


def utc_from_db(value) -> dt.datetime:
    """One stored UTCDateTime value (raw SQLite text or a datetime, naive = UTC) → aware UTC datetime."""
    if isinstance(value, str):
        return pd.Timestamp(value, tz="UTC").to_pydatetime()
    return as_utc(value)
