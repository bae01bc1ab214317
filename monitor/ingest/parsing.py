"""CSV and JSON payloads → candidate readings in canonical units, every record accounted for.

The payload is decoded and split into records (:mod:`monitor.ingest.tables`);
each record yields readings or a rejection with its line number, raw text
and reason:

* **long layout**: one reading per record from the time, station, variable,
  value and unit columns;
* **wide layout**: one reading per mapped column present in the header
  (``FeedConfig.columns``: column → variable + unit);
* the feed's variable names map to canonical ones: per station
  (``station_variable_names``) first, then for every station
  (``variable_names``), then the canonical name in any case with spaces or
  hyphens; a station's ``stored_only`` variables are accepted at it;
* values (:mod:`monitor.ingest.values`): empty cells (and ``NA``, ``N/A``,
  ``NaN``, ``null``, ``none``) are *missing* readings, kept with a NaN
  value, QC flag 9 later; a value below a detection limit (``<0.1``) is
  censored with its limit (or rejected, as the feed's ``below_detection``
  says); sentinels are rejected; units are converted, annotations in
  parentheses ignored and noted;
* local times without an offset are in the feed's time zone; a local time
  that does not exist or is ambiguous (daylight saving changes) is
  rejected; a time with an offset or ``Z`` is converted to UTC
  (:mod:`monitor.ingest.cells`);
* a time with no time of day (``2026-06-03``) is a whole-day value: it
  stands for that whole local day of the station's water body (its
  ``timezone``; the feed's for a station of no water body) and is stamped
  at the end of that day, with ``whole_day`` set.

Numbers must look like decimal numbers (``12``, ``-0.5``, ``1e-3``) and be
finite: ``inf``, ``0x1F``, ``1_000`` and ``1,5`` are rejected. A record
that cannot be split into readings (wrong number of fields, bad time,
unknown station, repeated header) counts as one rejected item.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import PurePath

import numpy as np
import pandas as pd

from monitor.ingest.cells import date_only, day_ends, parse_times
from monitor.ingest.tables import Rejection, Table, clean_text, csv_table, decode, json_table
from monitor.ingest.values import Verdicts, read_values
from monitor.ingest.variables import VARIABLES
from monitor.timeutil import NS_PER_DAY, ns_from_datetime

FUTURE_TOLERANCE_NS = NS_PER_DAY  # readings dated later than now + this are rejected


@dataclass
class Parsed:
    """Candidate readings (canonical units) and rejections of one payload."""

    station: np.ndarray  # object (str)
    variable: np.ndarray  # object (str)
    time_ns: np.ndarray  # int64 ns since 1970 UTC
    value: np.ndarray  # float, NaN = missing; a censored reading's detection limit (NaN: unknown limit)
    line: np.ndarray  # int, the record each reading came from
    issued_ns: np.ndarray | None = None  # int64, for weather-forecast feeds
    censored: np.ndarray | None = None  # bool: below the detection limit held in ``value``
    unit: np.ndarray | None = None  # object: a stored-only variable's unit as sent, else None
    whole_day: np.ndarray | None = None  # bool: a value for the local day ending at ``time_ns``
    rejected: list[Rejection] = field(default_factory=list)
    record_lines: list[int] = field(default_factory=list)  # every data record's line number
    notes: list[str] = field(default_factory=list)
    raw: dict[int, str] = field(default_factory=dict)  # raw text of each record, by line

    def __post_init__(self):
        if self.censored is None:
            self.censored = np.zeros(self.value.size, dtype=bool)
        if self.unit is None:
            self.unit = np.full(self.value.size, None, dtype=object)
        if self.whole_day is None:
            self.whole_day = np.zeros(self.value.size, dtype=bool)

    def __len__(self) -> int:
        return int(self.value.size)

    def raw_text(self, line) -> str:
        """The raw text of the record at ``line``, safe to store ("" if unknown)."""
        return clean_text(self.raw.get(int(line), ""))


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
        table = json_table(text, rejected, result.record_lines)
    else:
        table = csv_table(text, rejected, result.record_lines)
    if table is None or not table.rows:
        if table is None and feed.format != "json" and text.strip():
            result.record_lines.append(1)
            rejected.append(Rejection(1, clean_text(text), "no header line"))
        return result
    return _readings(table, feed, config, origin, now, result)


def _empty(feed) -> Parsed:
    return Parsed(station=np.array([], dtype=object), variable=np.array([], dtype=object),
                  time_ns=np.array([], dtype=np.int64), value=np.array([], dtype=float),
                  line=np.array([], dtype=np.int64),
                  issued_ns=np.array([], dtype=np.int64) if feed.role == "weather-forecast" else None)


# --------------------------------------------------------------------------
# Accepting and rejecting items (records or candidate readings)


@dataclass
class _Records:
    """The well-formed data records of a table, as columns."""

    cols: list[tuple[str, ...]]  # one tuple of cells per header column
    lines: np.ndarray  # int64 line numbers
    raws: list[str]

    def __len__(self) -> int:
        return int(self.lines.size)

    def column(self, i: int) -> np.ndarray:
        return np.array(self.cols[i], dtype=object)


@dataclass
class _Candidates:
    """Candidate readings: the record each came from, its variable, unit, raw cell and column name."""

    record: np.ndarray  # int, index into the records
    variable: np.ndarray
    unit: np.ndarray
    cells: np.ndarray
    col_names: np.ndarray

    def subset(self, mask: np.ndarray) -> _Candidates:
        return _Candidates(self.record[mask], self.variable[mask], self.unit[mask], self.cells[mask],
                           self.col_names[mask])


# --------------------------------------------------------------------------
# The steps


def _readings(table: Table, feed, config, origin, now, result: Parsed) -> Parsed:
    """The table's readings into ``result``: each step rejects what it cannot accept."""
    located = _locate_columns(table.header, feed)
    if isinstance(located, str):
        return _reject_all(table, located, result)
    index, wide_cols = located
    keep = _well_formed(table, result)
    if not keep:
        return result
    result.raw = dict(zip(table.lines, table.raws))
    records = _Records(list(zip(*(table.rows[j] for j in keep))),
                       np.array([table.lines[j] for j in keep], dtype=np.int64), [table.raws[j] for j in keep])
    rows = Verdicts(len(records))
    t_ns, issued_ns = _times(records, index, feed, now, rows)
    known = {st.id: st for st in getattr(config, "stations", ())} if config is not None else {}
    station = _stations(records, index, feed, origin, known, rows)
    whole_day = _whole_days(records, index, feed, config, known, station, t_ns, now, rows)
    cand = _candidates(records, index, feed, wide_cols, station, known)
    _report(result, records, np.nonzero(~rows.ok)[0], rows.reason[~rows.ok])
    cand = cand.subset(rows.ok[cand.record])
    readings = Verdicts(cand.record.size)
    where = (lambda i: f"column {cand.col_names[i]!r}: ") if feed.layout == "wide" else (lambda i: "")
    st_c = station[cand.record]
    values = read_values(cand.cells, cand.variable, cand.unit, st_c, feed, known, readings, where, result.notes)
    _report(result, records, cand.record[~readings.ok], readings.reason[~readings.ok])
    sel = readings.ok
    result.station = st_c[sel]
    result.variable = cand.variable[sel]
    result.time_ns = t_ns[cand.record[sel]]
    result.value = np.where(values.missing[sel], np.nan, values.number[sel])
    result.censored = values.censored[sel]
    result.unit = values.unit[sel]
    result.whole_day = whole_day[cand.record[sel]]
    result.line = records.lines[cand.record[sel]]
    if issued_ns is not None:
        result.issued_ns = issued_ns[cand.record[sel]]
    result.rejected.sort(key=lambda r: (r.line is None, r.line or 0))
    return result


def _locate_columns(header: list[str], feed) -> tuple[dict[str, int], list[tuple[int, str, str, str]]] | str:
    """The header index of each column the feed reads, and the wide layout's (index, column, variable, unit);
    or why the table cannot be read."""
    needed: dict[str, str] = {"time": feed.time_column}
    if feed.role == "weather-forecast":
        needed["issued"] = feed.issued_column
    if feed.station is None and not feed.station_from_folder:
        if not feed.station_column:
            return "the feed names no station, station_column or station_from_folder"
        needed["station"] = feed.station_column
    if feed.layout == "long":
        needed.update(variable=feed.variable_column, value=feed.value_column, unit=feed.unit_column)
    index: dict[str, int] = {}
    for key, name in needed.items():
        i, err = _column(header, name)
        if err:
            return err
        index[key] = i
    wide_cols: list[tuple[int, str, str, str]] = []
    if feed.layout == "wide":
        for col, cc in feed.columns.items():
            i, err = _column(header, col)
            if i is None and err and "appears" in err:
                return err
            if i is not None:
                wide_cols.append((i, col, cc.variable, cc.unit))
        if not wide_cols:
            return "none of the feed's columns (" + ", ".join(feed.columns) + ") is in the header"
    return index, wide_cols


def _column(header: list[str], name: str) -> tuple[int | None, str | None]:
    """Index of ``name`` in the header (case-insensitive), or an error when absent or repeated."""
    hits = [i for i, h in enumerate(header) if h == name] or \
           [i for i, h in enumerate(header) if h.lower() == name.lower()]
    if not hits:
        return None, f"no column {name!r} in the header ({', '.join(map(repr, header[:20]))})"
    if len(hits) > 1:
        return None, f"column {name!r} appears {len(hits)} times in the header"
    return hits[0], None


def _reject_all(table: Table, reason: str, result: Parsed) -> Parsed:
    for ln, raw in zip(table.lines, table.raws):
        result.rejected.append(Rejection(ln, clean_text(raw), reason))
    return result


def _well_formed(table: Table, result: Parsed) -> list[int]:
    """Indices of the records with as many fields as the header; the others, and repeated headers, rejected."""
    width = len(table.header)
    keep: list[int] = []
    norm_header = [h.strip() for h in table.header]
    for j, row in enumerate(table.rows):
        if len(row) != width:
            result.rejected.append(Rejection(table.lines[j], clean_text(table.raws[j]),
                                             f"expected {width} fields, got {len(row)}"))
        elif row[0].strip() == norm_header[0] and [c.strip() for c in row] == norm_header:
            result.rejected.append(Rejection(table.lines[j], clean_text(table.raws[j]), "repeated header line"))
        else:
            keep.append(j)
    return keep


def _times(records: _Records, index: dict[str, int], feed, now, rows: Verdicts
           ) -> tuple[np.ndarray, np.ndarray | None]:
    """Each record's time (and issue time) [ns UTC]; records with a bad or future time rejected."""
    tcell = records.column(index["time"])
    t_ns, t_ok, t_code = parse_times(tcell, feed.time_format, feed.timezone)
    fmt_name = "ISO 8601" if feed.time_format == "iso" else repr(feed.time_format)
    rows.reject(~t_ok, lambda j: _time_reason(tcell[j], t_code[j], feed.timezone, fmt_name))
    if feed.role == "readings" and now is not None:
        future = t_ok & (t_ns > ns_from_datetime(now) + FUTURE_TOLERANCE_NS)
        rows.reject(future, "time is more than a day in the future (clock or time zone wrong?)")
    issued_ns = None
    if "issued" in index:
        icell = records.column(index["issued"])
        issued_ns, i_ok, _ = parse_times(icell, feed.time_format, feed.timezone)
        rows.reject(~i_ok, lambda j: f"issue time {str(icell[j])[:60]!r} does not match the time format {fmt_name}")
    return t_ns, issued_ns


def _whole_days(records: _Records, index: dict[str, int], feed, config, known: Mapping, station: np.ndarray,
                t_ns: np.ndarray, now, rows: Verdicts) -> np.ndarray:
    """Records dated without a time of day → True, their ``t_ns`` moved to the end of that local day of the
    station's water body (in place); a day whose end cannot be placed, or lies in the future, is rejected."""
    if feed.role != "readings":
        return np.zeros(len(records), dtype=bool)
    tcell = records.column(index["time"])
    whole = date_only(tcell, feed.time_format) & rows.ok
    if not whole.any():
        return whole
    zones = np.array([_zone(config, known.get(s), feed.timezone) for s in station[whole]], dtype=object)
    ends, ok = day_ends(tcell[whole], feed.time_format, zones)
    idx = np.nonzero(whole)[0]
    t_ns[idx[ok]] = ends[ok]
    bad = np.zeros(len(records), dtype=bool)
    bad[idx[~ok]] = True
    rows.reject(bad, lambda j: f"the local day {str(tcell[j])[:60]!r} has no unambiguous end (daylight saving)")
    if now is not None:
        late = np.zeros(len(records), dtype=bool)
        late[idx[ok]] = ends[ok] - NS_PER_DAY > ns_from_datetime(now) + FUTURE_TOLERANCE_NS
        rows.reject(late, "time is more than a day in the future (clock or time zone wrong?)")
    whole[idx[~ok]] = False
    return whole


def _zone(config, st, feed_zone: str) -> str:
    """The time zone of a station's local day: its water body's, else the feed's."""
    if config is not None and st is not None and st.water_body:
        try:
            return config.water_body(st.water_body).timezone
        except (KeyError, LookupError, ValueError):
            return feed_zone
    return feed_zone


def _time_reason(cell, code: int, timezone: str, fmt_name: str) -> str:
    shown = repr(str(cell)[:60])
    if code == 2:
        return f"time {shown} does not exist or is ambiguous in {timezone} (daylight saving)"
    if code == 3:
        return f"time {shown} is outside the years 1900-2199"
    return f"time {shown} does not match the time format {fmt_name}"


def _stations(records: _Records, index: dict[str, int], feed, origin, known: Mapping, rows: Verdicts
              ) -> np.ndarray:
    """Each record's station: its column, the feed's station or the origin's folder; unknown ones rejected."""
    n = len(records)
    if "station" in index:
        station = np.array([s.strip() for s in records.cols[index["station"]]], dtype=object)
    else:
        name = feed.station if feed.station is not None else PurePath(origin or ".").parent.name
        station = np.full(n, name, dtype=object)
    if known:
        unknown = ~pd.Series(station).isin(list(known)).to_numpy()
        if unknown.any():
            rows.reject(unknown, lambda j: f"unknown station {str(station[j])[:60]!r}")
    elif not all(station):
        rows.reject(station == "", "no station")
    return station


def _candidates(records: _Records, index: dict[str, int], feed, wide_cols, station: np.ndarray,
                known: Mapping) -> _Candidates:
    """Candidate readings: one per record (long layout) or per record and mapped column (wide)."""
    n = len(records)
    if feed.layout == "long":
        names = _VariableNames(feed, known)
        return _Candidates(
            np.arange(n), np.array([names.resolve(s, v) for s, v in zip(station, records.cols[index["variable"]])],
                                   dtype=object),
            np.array([u.strip() for u in records.cols[index["unit"]]], dtype=object),
            records.column(index["value"]), np.full(n, feed.value_column, dtype=object))
    k = len(wide_cols)
    return _Candidates(
        np.tile(np.arange(n), k), np.repeat(np.array([w[2] for w in wide_cols], dtype=object), n),
        np.repeat(np.array([w[3] for w in wide_cols], dtype=object), n),
        np.concatenate([records.column(w[0]) for w in wide_cols]),
        np.repeat(np.array([w[1] for w in wide_cols], dtype=object), n))


class _VariableNames:
    """The feed's variable names → variables, per station: the station's own names in the feed
    (``station_variable_names``), the feed's names (``variable_names``), then the canonical name or the
    station's stored-only name in any case, with spaces or hyphens for underscores; else unchanged."""

    def __init__(self, feed, known: Mapping):
        self.common = {k.strip().lower(): v for k, v in getattr(feed, "variable_names", {}).items()}
        self.per_station = {s: {k.strip().lower(): v for k, v in m.items()}
                            for s, m in getattr(feed, "station_variable_names", {}).items()}
        self.own = {sid: {x.lower(): x for x in getattr(st, "stored_only", ())} for sid, st in known.items()}
        self.cache: dict[tuple[str, str], str] = {}

    def resolve(self, station: str, name: str) -> str:
        got = self.cache.get((station, name))
        if got is None:
            key = name.strip().lower()
            got = self.per_station.get(station, {}).get(key) or self.common.get(key)
            if got is None:
                norm = "_".join(key.replace("-", " ").split())
                got = norm if norm in VARIABLES else self.own.get(station, {}).get(norm, name.strip())
            self.cache[(station, name)] = got
        return got


def _report(result: Parsed, records: _Records, record_idx: np.ndarray, reasons: np.ndarray) -> None:
    """One rejection per item, with its record's line and raw text."""
    for j, reason in zip(record_idx, reasons):
        result.rejected.append(Rejection(int(records.lines[j]), clean_text(records.raws[j]), reason))
