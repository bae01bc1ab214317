"""CSV and JSON payloads → candidate readings in canonical units, every record accounted for.

A payload is decoded (a BOM decides UTF-8/16/32; otherwise UTF-8, and
Latin-1 when the bytes are not valid UTF-8), split into records (CSV lines
or JSON objects), and each record yields readings or a rejection with its
line number (the JSON object's position for JSON), raw text and reason:

* **long layout**: one reading per record from the time, station, variable,
  value and unit columns;
* **wide layout**: one reading per mapped column present in the header
  (``FeedConfig.columns``: column → variable + unit);
* empty cells (and ``NA``, ``N/A``, ``NaN``, ``null``, ``none``) are
  *missing* readings: kept with a NaN value, QC flag 9 later;
* a value below a detection limit (``<0.1``) is rejected, halved or set to
  zero as the feed's ``below_detection`` says;
* local times without an offset are in the feed's time zone; a local time
  that does not exist or is ambiguous (daylight saving changes) is
  rejected; a time with an offset or ``Z`` is converted to UTC.

Numbers must look like decimal numbers (``12``, ``-0.5``, ``1e-3``) and be
finite: ``inf``, ``0x1F``, ``1_000`` and ``1,5`` are rejected. A record
that cannot be split into readings (wrong number of fields, bad time,
unknown station, repeated header) counts as one rejected item.
"""

from __future__ import annotations

import codecs
import csv
import datetime as dt
import io
import json
import re
from dataclasses import dataclass, field
from pathlib import PurePath
from typing import Any, Mapping

import numpy as np
import pandas as pd

from monitor.ingest.units import UnitError, conversion
from monitor.ingest.variables import VARIABLES

MAX_RAW_CHARS = 4000  # rejected rows keep at most this much of their raw text (the payload is archived whole)
MISSING_MARKERS = frozenset({"", "na", "n/a", "nan", "null", "none"})
_NUMBER = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d{1,4})?"
_NUMBER_RE = re.compile(_NUMBER)
_BELOW_RE = re.compile(r"<\s*(" + _NUMBER + r")")
_OFFSET_RE = r"(?:[zZ]|[+-]\d\d(?::?\d\d)?)$"
FUTURE_TOLERANCE = pd.Timedelta(days=1)
EARLIEST = pd.Timestamp("1900-01-01")  # times outside [EARLIEST, LATEST) are rejected
LATEST = pd.Timestamp("2200-01-01")  # readings dated later than now + this are rejected


@dataclass
class Rejection:
    line: int | None
    raw: str
    reason: str


@dataclass
class Parsed:
    """Candidate readings (canonical units) and rejections of one payload."""

    station: np.ndarray  # object (str)
    variable: np.ndarray  # object (str)
    time_ns: np.ndarray  # int64 ns since 1970 UTC
    value: np.ndarray  # float, NaN = missing
    line: np.ndarray  # int, the record each reading came from
    issued_ns: np.ndarray | None = None  # int64, for weather-forecast feeds
    rejected: list[Rejection] = field(default_factory=list)
    record_lines: list[int] = field(default_factory=list)  # every data record's line number
    notes: list[str] = field(default_factory=list)
    raw: dict[int, str] = field(default_factory=dict)  # raw text of each record, by line

    def __len__(self) -> int:
        return int(self.value.size)


def clean_text(s: str) -> str:
    """Text safe for any database column: NUL and lone surrogates escaped, length bounded."""
    if "\x00" in s:
        s = s.replace("\x00", "\\x00")
    s = s.encode("utf-8", "backslashreplace").decode("utf-8")
    if len(s) > MAX_RAW_CHARS:
        s = s[:MAX_RAW_CHARS] + f"… ({len(s)} characters in all)"
    return s


def decode(payload: bytes) -> tuple[str, str]:
    """(text, encoding): a BOM wins; else UTF-8; else Latin-1 (never fails)."""
    for bom, enc in ((codecs.BOM_UTF32_LE, "utf-32"), (codecs.BOM_UTF32_BE, "utf-32"),
                     (codecs.BOM_UTF8, "utf-8-sig"), (codecs.BOM_UTF16_LE, "utf-16"),
                     (codecs.BOM_UTF16_BE, "utf-16")):
        if payload.startswith(bom):
            try:
                return payload.decode(enc), enc
            except UnicodeDecodeError:
                break
    try:
        return payload.decode("utf-8"), "utf-8"
    except UnicodeDecodeError:
        return payload.decode("latin-1"), "latin-1"


# --------------------------------------------------------------------------
# Records


@dataclass
class _Table:
    header: list[str]
    rows: list[list[str]]
    lines: list[int]
    raws: list[str]


def _plain_table(text: str, record_lines: list[int]) -> _Table | None:
    """The common case of :func:`_csv_table`: no quotes, no CR, no NUL, no over-long line.

    Then a CSV record is one physical line split at commas, exactly as the
    csv module would read it, only faster.
    """
    lines = text.split("\n")
    if lines and lines[-1] == "":
        lines.pop()
    fields = [line.split(",") for line in lines]
    keep = [i for i, f in enumerate(fields) if len(f) > 1 or f[0].strip()]
    if not keep:
        return None
    header = [f.strip() for f in fields[keep[0]]]
    if header and header[0].startswith("\ufeff"):
        header[0] = header[0][1:]
    body = keep[1:]
    row_lines = [i + 1 for i in body]
    record_lines.extend(row_lines)
    return _Table(header, [fields[i] for i in body], row_lines, [lines[i] for i in body])


def _csv_table(text: str, rejected: list[Rejection], record_lines: list[int], fast: bool = True) -> _Table | None:
    if fast and '"' not in text and "\r" not in text and "\x00" not in text and \
            max(map(len, text.split("\n")), default=0) < csv.field_size_limit():
        return _plain_table(text, record_lines)
    # split on \n, \r and \r\n only (str.splitlines would also split on \x85, \u2028, form feeds…)
    lines = list(io.StringIO(text, newline=""))
    reader = csv.reader(iter(lines))
    header: list[str] | None = None
    rows, row_lines, raws = [], [], []
    prev = 0
    while True:
        try:
            fields = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            start = prev + 1
            raw = "".join(lines[prev:reader.line_num])
            prev = reader.line_num
            record_lines.append(start)
            rejected.append(Rejection(start, clean_text(raw), f"unreadable CSV record: {exc}"))
            continue
        start = prev + 1
        raw_lines = lines[prev:reader.line_num]
        prev = reader.line_num
        if not fields or (len(fields) == 1 and not fields[0].strip()):
            continue  # a blank line is not a record (",,," is: an empty record, rejected below)
        if header is None:
            header = [f.strip() for f in fields]
            if header and header[0].startswith("\ufeff"):
                header[0] = header[0][1:]
            continue
        record_lines.append(start)
        rows.append(fields)
        row_lines.append(start)
        raws.append("".join(raw_lines).rstrip("\r\n"))
    if header is None:
        return None
    return _Table(header, rows, row_lines, raws)


def _scalar(value: Any) -> str | None:
    if value is None:
        return ""
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        return repr(value) if not isinstance(value, float) or np.isfinite(value) else str(value)
    if isinstance(value, str):
        return value
    return None


def _json_table(text: str, rejected: list[Rejection], record_lines: list[int]) -> _Table | None:
    try:
        doc = json.loads(text)
    except (ValueError, RecursionError) as exc:
        record_lines.append(1)
        rejected.append(Rejection(1, clean_text(text), f"not valid JSON: {exc}"))
        return None
    if isinstance(doc, Mapping) and isinstance(doc.get("readings"), list):
        records = doc["readings"]
    elif isinstance(doc, list):
        records = doc
    elif isinstance(doc, Mapping):
        records = [doc]
    else:
        record_lines.append(1)
        rejected.append(Rejection(1, clean_text(text), "expected a JSON object, a list of objects, "
                                                       "or {\"readings\": [...]}"))
        return None
    header: list[str] = []
    seen: set[str] = set()
    rows, lines, raws = [], [], []
    for i, rec in enumerate(records, start=1):
        record_lines.append(i)
        try:
            raw = json.dumps(rec, ensure_ascii=False)
        except (ValueError, RecursionError):
            raw = repr(rec)
        if not isinstance(rec, Mapping):
            rejected.append(Rejection(i, clean_text(raw), "record is not a JSON object"))
            continue
        row = {}
        bad = None
        for k, v in rec.items():
            s = _scalar(v)
            if s is None:
                bad = k
                break
            row[str(k).strip()] = s
        if bad is not None:
            rejected.append(Rejection(i, clean_text(raw), f"field {bad!r} is not a string, number or null"))
            continue
        for k in row:
            if k not in seen:
                seen.add(k)
                header.append(k)
        rows.append(row)
        lines.append(i)
        raws.append(raw)
    index = {k: j for j, k in enumerate(header)}
    table_rows = []
    for row in rows:
        out = [""] * len(header)
        for k, v in row.items():
            out[index[k]] = v
        table_rows.append(out)
    return _Table(header, table_rows, lines, raws)


# --------------------------------------------------------------------------
# Values and times


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


# --------------------------------------------------------------------------
# The whole payload


def _column(header: list[str], name: str) -> tuple[int | None, str | None]:
    """Index of ``name`` in the header (case-insensitive), or an error when absent or repeated."""
    hits = [i for i, h in enumerate(header) if h == name] or \
           [i for i, h in enumerate(header) if h.lower() == name.lower()]
    if not hits:
        return None, f"no column {name!r} in the header ({', '.join(map(repr, header[:20]))})"
    if len(hits) > 1:
        return None, f"column {name!r} appears {len(hits)} times in the header"
    return hits[0], None


def _empty(feed) -> Parsed:
    return Parsed(station=np.array([], dtype=object), variable=np.array([], dtype=object),
                  time_ns=np.array([], dtype=np.int64), value=np.array([], dtype=float),
                  line=np.array([], dtype=np.int64),
                  issued_ns=np.array([], dtype=np.int64) if feed.role == "weather-forecast" else None)


def parse_payload(payload: bytes, feed, config=None, *, origin: str = "",
                  now: dt.datetime | None = None) -> Parsed:
    """Parse one payload of ``feed`` (a :class:`monitor.config.FeedConfig`) into readings.

    config: the :class:`monitor.config.Config` (known stations and their
    calibrations); origin: the file path, URL or topic (the station comes
    from its folder when ``feed.station_from_folder``); now: readings later
    than now + 1 day are rejected (a clock or time-zone error).
    """
    text, encoding = decode(payload)
    result = _empty(feed)
    if encoding == "latin-1":
        result.notes.append("payload is not valid UTF-8; decoded as Latin-1")
    rejected = result.rejected
    if feed.format == "json":
        table = _json_table(text, rejected, result.record_lines)
    else:
        table = _csv_table(text, rejected, result.record_lines)
    if table is None or not table.rows:
        if table is None and feed.format != "json" and text.strip():
            result.record_lines.append(1)
            rejected.append(Rejection(1, clean_text(text), "no header line"))
        return result
    return _readings(table, feed, config, origin, now, result)


def _canonical_variables(names, aliases: Mapping[str, str]) -> np.ndarray:
    """The feed's variable names → canonical names: the feed's ``variable_names`` first, then the
    canonical name itself in any case, with spaces or hyphens for underscores; else unchanged."""
    lookup = {k.strip().lower(): v for k, v in aliases.items()}
    cache: dict[str, str] = {}
    out = []
    for name in names:
        got = cache.get(name)
        if got is None:
            key = name.strip().lower()
            if key in lookup:
                got = lookup[key]
            else:
                norm = "_".join(key.replace("-", " ").split())
                got = norm if norm in VARIABLES else name.strip()
            cache[name] = got
        out.append(got)
    return np.array(out, dtype=object)


def _time_reason(cell, code: int, timezone: str, fmt_name: str) -> str:
    shown = repr(str(cell)[:60])
    if code == 2:
        return f"time {shown} does not exist or is ambiguous in {timezone} (daylight saving)"
    if code == 3:
        return f"time {shown} is outside the years 1900-2199"
    return f"time {shown} does not match the time format {fmt_name}"


def _reject_all(table: _Table, reason: str, result: Parsed) -> Parsed:
    for ln, raw in zip(table.lines, table.raws):
        result.rejected.append(Rejection(ln, clean_text(raw), reason))
    return result


def _readings(table: _Table, feed, config, origin, now, result: Parsed) -> Parsed:
    header = table.header
    needed: dict[str, str] = {"time": feed.time_column}
    if feed.role == "weather-forecast":
        needed["issued"] = feed.issued_column
    if feed.station is None and not feed.station_from_folder:
        if not feed.station_column:
            return _reject_all(table, "the feed names no station, station_column or station_from_folder", result)
        needed["station"] = feed.station_column
    if feed.layout == "long":
        needed.update(variable=feed.variable_column, value=feed.value_column, unit=feed.unit_column)
    index: dict[str, int] = {}
    for key, name in needed.items():
        i, err = _column(header, name)
        if err:
            return _reject_all(table, err, result)
        index[key] = i
    wide_cols: list[tuple[int, str, str, str]] = []  # (index, column, variable, unit)
    if feed.layout == "wide":
        for col, cc in feed.columns.items():
            i, err = _column(header, col)
            if i is None and err and "appears" in err:
                return _reject_all(table, err, result)
            if i is not None:
                wide_cols.append((i, col, cc.variable, cc.unit))
        if not wide_cols:
            return _reject_all(table, "none of the feed's columns (" + ", ".join(feed.columns)
                               + ") is in the header", result)

    # records with the right shape
    width = len(header)
    keep: list[int] = []
    norm_header = [h.strip() for h in header]
    for j, row in enumerate(table.rows):
        if len(row) != width:
            result.rejected.append(Rejection(table.lines[j], clean_text(table.raws[j]),
                                             f"expected {width} fields, got {len(row)}"))
        elif row[0].strip() == norm_header[0] and [c.strip() for c in row] == norm_header:
            result.rejected.append(Rejection(table.lines[j], clean_text(table.raws[j]), "repeated header line"))
        else:
            keep.append(j)
    if not keep:
        return result
    result.raw = dict(zip(table.lines, table.raws))
    rows = [table.rows[j] for j in keep]
    lines = np.array([table.lines[j] for j in keep], dtype=np.int64)
    raws = [table.raws[j] for j in keep]
    cols = list(zip(*rows))

    def column(key_index: int) -> np.ndarray:
        return np.array(cols[key_index], dtype=object)

    n = len(rows)
    row_ok = np.ones(n, dtype=bool)
    row_reason = np.full(n, None, dtype=object)

    def fail(mask: np.ndarray, reason) -> None:
        """Reject the rows in ``mask`` not yet rejected; ``reason`` is a string or a function of the row."""
        new = mask & row_ok
        for j in np.nonzero(new)[0]:
            row_reason[j] = reason if isinstance(reason, str) else reason(j)
        row_ok[new] = False

    tcell = column(index["time"])
    t_ns, t_ok, t_code = parse_times(tcell, feed.time_format, feed.timezone)
    fmt_name = "ISO 8601" if feed.time_format == "iso" else repr(feed.time_format)
    fail(~t_ok, lambda j: _time_reason(tcell[j], t_code[j], feed.timezone, fmt_name))
    if feed.role == "readings" and now is not None:
        limit = pd.Timestamp(now).tz_convert("UTC").tz_localize(None) + FUTURE_TOLERANCE
        future = t_ok & (t_ns > limit.value)
        fail(future, "time is more than a day in the future (clock or time zone wrong?)")
    issued_ns = None
    if "issued" in index:
        icell = column(index["issued"])
        issued_ns, i_ok, _ = parse_times(icell, feed.time_format, feed.timezone)
        fail(~i_ok, lambda j: f"issue time {str(icell[j])[:60]!r} does not match the time format {fmt_name}")

    known = {st.id: st for st in getattr(config, "stations", ())} if config is not None else {}
    if "station" in index:
        station = np.array([s.strip() for s in cols[index["station"]]], dtype=object)
    else:
        name = feed.station if feed.station is not None else PurePath(origin or ".").parent.name
        station = np.full(n, name, dtype=object)
    if known:
        unknown = ~pd.Series(station).isin(list(known)).to_numpy()
        if unknown.any():
            fail(unknown, lambda j: f"unknown station {str(station[j])[:60]!r}")
    elif not all(station):
        fail(station == "", "no station")

    # candidate readings: (row index, variable, unit, raw cell)
    if feed.layout == "long":
        r_idx = np.arange(n)
        variable = _canonical_variables(cols[index["variable"]], getattr(feed, "variable_names", {}))
        unit = np.array([u.strip() for u in cols[index["unit"]]], dtype=object)
        cells = column(index["value"])
        col_names = np.full(n, feed.value_column, dtype=object)
    else:
        k = len(wide_cols)
        r_idx = np.tile(np.arange(n), k)
        variable = np.repeat(np.array([w[2] for w in wide_cols], dtype=object), n)
        unit = np.repeat(np.array([w[3] for w in wide_cols], dtype=object), n)
        cells = np.concatenate([column(w[0]) for w in wide_cols])
        col_names = np.repeat(np.array([w[1] for w in wide_cols], dtype=object), n)

    # rows that failed as a whole: one rejection each
    for j in np.nonzero(~row_ok)[0]:
        result.rejected.append(Rejection(int(lines[j]), clean_text(raws[j]), row_reason[j]))
    live = row_ok[r_idx]
    r_idx, variable, unit, cells, col_names = r_idx[live], variable[live], unit[live], cells[live], col_names[live]
    values, missing, below = parse_numbers(cells)
    cand_ok = np.ones(r_idx.size, dtype=bool)
    reasons = np.full(r_idx.size, None, dtype=object)

    def cfail(mask, reason_fn) -> None:
        new = mask & cand_ok
        for i in np.nonzero(new)[0]:
            reasons[i] = reason_fn(i)
        cand_ok[new] = False

    where = (lambda i: f"column {col_names[i]!r}: ") if feed.layout == "wide" else (lambda i: "")
    cfail(~pd.Series(variable).isin(list(VARIABLES)).to_numpy(),
          lambda i: f"unknown variable {str(variable[i])[:60]!r}; expected one of {', '.join(VARIABLES)}")
    bad_number = ~(missing | below | np.isfinite(values))
    cfail(bad_number, lambda i: where(i) + f"value {str(cells[i])[:60]!r} is not a finite decimal number")
    if below.any():
        if feed.below_detection == "reject":
            cfail(below, lambda i: where(i) + f"value {str(cells[i])[:60]!r} is below the detection limit "
                                              "(the feed's below_detection is 'reject')")
        else:
            values[below] = values[below] * (0.5 if feed.below_detection == "half" else 0.0)

    # unit conversion per (station, variable, unit)
    st_c = station[r_idx]
    groups = pd.DataFrame({"s": st_c, "v": variable, "u": unit}).groupby(["s", "v", "u"], sort=False).indices
    for (s, v, u), members in groups.items():
        members = members[cand_ok[members]]
        if members.size == 0:
            continue
        cal = known[s].calibration if s in known else None
        try:
            scale, offset = conversion(v, u, cal)
        except UnitError as exc:
            msg = str(exc)
            cfail(np.isin(np.arange(r_idx.size), members), lambda i: where(i) + msg)
            continue
        values[members] = values[members] * scale + offset
    for i in np.nonzero(~cand_ok)[0]:
        j = r_idx[i]
        result.rejected.append(Rejection(int(lines[j]), clean_text(raws[j]), reasons[i]))

    sel = cand_ok
    result.station = st_c[sel]
    result.variable = variable[sel]
    result.time_ns = t_ns[r_idx[sel]]
    result.value = np.where(missing[sel], np.nan, values[sel])
    result.line = lines[r_idx[sel]]
    if issued_ns is not None:
        result.issued_ns = issued_ns[r_idx[sel]]
    result.rejected.sort(key=lambda r: (r.line is None, r.line or 0))
    return result
