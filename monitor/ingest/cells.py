"""Cell text → numbers and times.

Numbers must look like decimal numbers (``12``, ``-0.5``, ``1e-3``) and be
finite: ``inf``, ``0x1F``, ``1_000`` and ``1,5`` are not numbers. Empty
cells (and ``NA``, ``N/A``, ``NaN``, ``null``, ``none``) are *missing*; a
value below a detection limit is written ``<0.1``.

Times are ISO 8601 (with or without an offset) or follow a strftime
format; local times without an offset are in the feed's time zone, and a
local time that does not exist or is ambiguous (daylight saving changes)
is refused. Times come out as int64 ns since 1970-01-01T00:00Z.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

MISSING_MARKERS = frozenset({"", "na", "n/a", "nan", "null", "none"})
_NUMBER = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d{1,4})?"
_OFFSET_RE = r"(?:[zZ]|[+-]\d\d(?::?\d\d)?)$"
EARLIEST = pd.Timestamp("1900-01-01")  # times outside [EARLIEST, LATEST) are refused
LATEST = pd.Timestamp("2200-01-01")


def parse_numbers(cells: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cells (str) → (values, missing mask, below-detection mask); malformed → NaN with both masks False.

    ``values`` holds the number (the detection limit for ``<x``).
    """
    fast = _numbers_fast(cells)
    if fast is not None:
        return fast
    s = pd.Series(cells, dtype=object).astype(str).str.strip()
    lower = s.str.lower()
    missing = lower.isin(MISSING_MARKERS).to_numpy()
    ok = s.str.fullmatch(_NUMBER).fillna(False).to_numpy(dtype=bool)
    values = np.full(len(s), np.nan)
    if ok.any():
        values[ok] = s[ok].astype(float).to_numpy()
    below = np.zeros(len(s), dtype=bool)
    maybe = (~ok) & (~missing) & s.str.startswith("<").to_numpy(dtype=bool)
    if maybe.any():
        m = s[maybe].str.fullmatch(r"<\s*" + _NUMBER).fillna(False).to_numpy(dtype=bool)
        idx = np.nonzero(maybe)[0][m]
        below[idx] = True
        values[idx] = s.iloc[idx].str.lstrip("<").str.strip().astype(float).to_numpy()
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


def parse_times(cells: np.ndarray, time_format: str, timezone: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cells (str) → (ns since 1970 UTC as int64, ok mask, reason codes).

    ``time_format`` is ``"iso"`` (ISO 8601, with or without offset) or a
    strftime format; naive times are local times in ``timezone``. Reason
    codes for failures: 1 unparseable, 2 nonexistent/ambiguous local time,
    3 outside the years 1900–2199.
    """
    s = pd.Series(cells, dtype=object).astype(str).str.strip()
    n = len(s)
    out = np.zeros(n, dtype=np.int64)
    ok = np.zeros(n, dtype=bool)
    code = np.ones(n, dtype=np.uint8)
    if n == 0:
        return out, ok, code
    if time_format == "iso":
        aware = s.str.contains(_OFFSET_RE, regex=True).to_numpy(dtype=bool)
        fmt = "ISO8601"
    else:
        aware = np.full(n, "%z" in time_format or "%Z" in time_format)
        fmt = time_format
    for is_aware in (False, True):
        sel = aware == is_aware
        if not sel.any():
            continue
        part = s[sel]
        try:
            parsed = pd.to_datetime(part, format=fmt, errors="coerce", utc=is_aware)
        except (ValueError, TypeError, OverflowError):
            parsed = pd.Series(pd.NaT, index=part.index, dtype="datetime64[ns]")
        if not is_aware:
            if getattr(parsed.dt, "tz", None) is not None:
                parsed = parsed.dt.tz_convert("UTC")
            else:
                parsed = parsed.dt.tz_localize(timezone, ambiguous="NaT", nonexistent="NaT")
                code_local = parsed.isna().to_numpy()
                # times that parsed naive but failed to localize are DST problems
                naive = pd.to_datetime(part, format=fmt, errors="coerce")
                dst = code_local & naive.notna().to_numpy()
                idx = np.nonzero(sel)[0]
                code[idx[dst]] = 2
                parsed = parsed.dt.tz_convert("UTC")
        idx = np.nonzero(sel)[0]
        naive_utc = parsed.dt.tz_convert("UTC").dt.tz_localize(None)
        inside = ((naive_utc >= EARLIEST) & (naive_utc < LATEST)).to_numpy(dtype=bool)
        code[idx[parsed.notna().to_numpy() & ~inside]] = 3
        good = inside
        ns = naive_utc.where(inside, EARLIEST).astype("datetime64[ns]").to_numpy().astype(np.int64)
        out[idx[good]] = ns[good]
        ok[idx[good]] = True
    return out, ok, code
