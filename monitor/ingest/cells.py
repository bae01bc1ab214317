"""Cell text → numbers and times.

Numbers must look like decimal numbers (``12``, ``-0.5``, ``1e-3``) and be
finite: ``inf``, ``0x1F``, ``1_000`` and ``1,5`` are not numbers. Empty
cells (and ``NA``, ``N/A``, ``NaN``, ``null``, ``none``) are *missing*; a
value below a detection limit is written ``<0.1``.

Times are ISO 8601 (with or without an offset) or follow a strftime
format; local times without an offset are in the feed's time zone, and a
local time that does not exist or is ambiguous (daylight saving changes)
is refused. Times come out as int64 ns since 1970-01-01T00:00Z.

A time with no time of day (``2026-06-03``, or a strftime format without
hour, minute or second) is a *whole-day* value: it stands for the whole
local day of the water body, and is stamped at the end of that day
(:func:`date_only`, :func:`day_ends`), the first instant at which the day's
value can exist.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

MISSING_MARKERS = frozenset({"", "na", "n/a", "nan", "null", "none"})
_NUMBER = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d{1,4})?"
_OFFSET = re.compile(r"(?:[zZ]|[+-]\d\d(?::?\d\d)?)$")
_NUMBER_RE = re.compile(_NUMBER)
_BELOW_RE = re.compile(r"<\s*(" + _NUMBER + ")")
EARLIEST = pd.Timestamp("1900-01-01")  # times outside [EARLIEST, LATEST) are refused
LATEST = pd.Timestamp("2200-01-01")


def parse_numbers(cells: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cells (str) → (values, missing mask, below-detection mask); malformed → NaN with both masks False.

    ``values`` holds the number (the detection limit for ``<x``).
    """
    fast = _numbers_fast(cells)
    if fast is not None:
        return fast
    n = len(cells)
    values = np.full(n, np.nan)
    missing = np.zeros(n, dtype=bool)
    below = np.zeros(n, dtype=bool)
    for i, cell in enumerate(cells):  # one regular expression per cell (what pandas' .str methods do, minus overhead)
        text = str(cell).strip()
        if text.lower() in MISSING_MARKERS:
            missing[i] = True
        elif _NUMBER_RE.fullmatch(text):
            values[i] = float(text)
        else:
            m = _BELOW_RE.fullmatch(text)
            if m:
                values[i] = float(m.group(1))
                below[i] = True
    with np.errstate(invalid="ignore"):
        finite = np.isfinite(values)
    values[~finite] = np.nan
    return values, missing, below & finite


_PLAIN_NUMBER_CHARS = frozenset("0123456789.-+eE")


def _numbers_fast(cells: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """The common case — every cell a plain decimal number or empty — without regular expressions.

    Within the characters ``0-9 . + - e E`` Python's float() accepts exactly
    the strings :data:`_NUMBER` matches (it raises on ``1.2.3``, ``--1``,
    ``e5``…), so one float() per cell suffices; anything else takes the
    general path.
    """
    cells = list(cells)
    try:
        joined = "".join(cells)  # every cell a str (CSV fields; JSON scalars are turned into str)
    except TypeError:
        return None
    if not cells or not set(joined) <= _PLAIN_NUMBER_CHARS:
        return None
    arr = np.asarray(cells, dtype=object)
    missing = arr == ""
    values = np.full(arr.size, np.nan)
    try:
        values[~missing] = arr[~missing].astype(float)
    except (ValueError, OverflowError):
        return None
    finite = np.isfinite(values)
    values[~finite] = np.nan
    if (~finite & ~missing).any():
        return None  # overflow to inf: let the general path reject it with its reason
    return values, missing, np.zeros(arr.size, dtype=bool)


_DATE_ONLY_ISO = re.compile(r"\d{4}-\d{2}-\d{2}$")
#: strftime directives that give a time of day; a format with none of them names a whole day
_TIME_OF_DAY_DIRECTIVES = ("%H", "%I", "%M", "%S", "%p", "%X", "%c", "%T", "%R", "%f", "%s", "%z", "%Z")


def date_only(cells: np.ndarray, time_format: str) -> np.ndarray:
    """Cells (str) that name a calendar date without a time of day → True (whole-day values)."""
    if time_format == "iso":
        return np.fromiter((_DATE_ONLY_ISO.match(str(c).strip()) is not None for c in cells), dtype=bool,
                           count=len(cells))
    return np.full(len(cells), not any(d in time_format for d in _TIME_OF_DAY_DIRECTIVES))


def day_ends(cells: np.ndarray, time_format: str, timezones: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Dates (str, as :func:`date_only` accepts) → (end of that local day [ns UTC, int64], ok mask).

    The end of local day D is local midnight at the start of D + 1 in the
    cell's time zone (``timezones``, one IANA name per cell), so a day of a
    daylight-saving change lasts 23 or 25 hours. A midnight that does not
    exist is shifted forward to the first valid instant; an ambiguous one
    (rare: zones that change at midnight) is refused (ok False).
    """
    texts = np.array([str(c).strip() for c in cells], dtype=object)
    n = texts.size
    out = np.zeros(n, dtype=np.int64)
    ok = np.zeros(n, dtype=bool)
    if n == 0:
        return out, ok
    fmt = "ISO8601" if time_format == "iso" else time_format
    try:
        dates = pd.DatetimeIndex(pd.to_datetime(texts, format=fmt, errors="coerce")).normalize()
    except (ValueError, TypeError, OverflowError):
        return out, ok
    next_midnight = dates + pd.Timedelta(days=1)
    zones = np.asarray(timezones, dtype=object)
    for tz in pd.unique(zones):
        idx = np.nonzero(zones == tz)[0]
        local = pd.DatetimeIndex(next_midnight[idx]).tz_localize(tz, ambiguous="NaT", nonexistent="shift_forward")
        good = ~local.isna()
        naive_utc = local.tz_convert("UTC").tz_localize(None)
        inside = good & np.asarray((naive_utc >= EARLIEST) & (naive_utc < LATEST), dtype=bool)
        out[idx[inside]] = naive_utc[inside].as_unit("ns").asi8
        ok[idx[inside]] = True
    return out, ok


def parse_times(cells: np.ndarray, time_format: str, timezone: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cells (str) → (ns since 1970 UTC as int64, ok mask, reason codes).

    ``time_format`` is ``"iso"`` (ISO 8601, with or without offset) or a
    strftime format; naive times are local times in ``timezone``. Reason
    codes for failures: 1 unparseable, 2 nonexistent/ambiguous local time,
    3 outside the years 1900–2199.
    """
    texts = np.array([str(c).strip() for c in cells], dtype=object)
    n = texts.size
    out = np.zeros(n, dtype=np.int64)
    ok = np.zeros(n, dtype=bool)
    code = np.ones(n, dtype=np.uint8)
    if n == 0:
        return out, ok, code
    if time_format == "iso":
        aware = np.fromiter((_OFFSET.search(t) is not None for t in texts), dtype=bool, count=n)
        fmt = "ISO8601"
    else:
        aware = np.full(n, "%z" in time_format or "%Z" in time_format)
        fmt = time_format
    for is_aware in (False, True):
        idx = np.nonzero(aware == is_aware)[0]
        if idx.size == 0:
            continue
        try:
            parsed = pd.DatetimeIndex(pd.to_datetime(texts[idx], format=fmt, errors="coerce", utc=is_aware))
        except (ValueError, TypeError, OverflowError):
            parsed = pd.DatetimeIndex([pd.NaT] * idx.size)
        if parsed.tz is None:
            # naive local times; those that parse but cannot be localized are DST problems
            parsed_naive = ~parsed.isna()
            parsed = parsed.tz_localize(timezone, ambiguous="NaT", nonexistent="NaT")
            code[idx[parsed.isna() & parsed_naive]] = 2
        naive_utc = parsed.tz_convert("UTC").tz_localize(None)
        inside = np.asarray((naive_utc >= EARLIEST) & (naive_utc < LATEST), dtype=bool)
        code[idx[~parsed.isna() & ~inside]] = 3
        ns = naive_utc.where(inside, EARLIEST).as_unit("ns").asi8
        out[idx[inside]] = ns[inside]
        ok[idx[inside]] = True
    return out, ok, code
