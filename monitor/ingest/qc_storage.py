"""Storing a batch's readings with QC that sees the stored readings around them.

QC (:mod:`monitor.ingest.qc`) runs per station and variable on the batch's
readings together with the stored readings within twice the QC context
(:func:`monitor.ingest.qc.context_hours`), so spikes and flat lines across
file boundaries are seen; stored neighbours whose flags change are updated
in the same transaction. A fluorometer's drift check
(:mod:`monitor.ingest.qc_drift`) also reads the lab chlorophyll-a of its
station and basin, and new lab chlorophyll-a re-runs the QC of the
fluorometers it checks.

Against the store a reading is identified by (station, variable, time,
source): the same value again is a duplicate; another value is rejected
with the stored one in the reason, except that a stored *missing* reading
(QC flag 9) is filled in by a later value.

A censored reading (below its detection limit) is stored with value NULL,
``censored = 1``, its limit in ``detection_limit`` and QC flag 9 (no number
to pass or fail): it is no neighbour in the spike, rate-of-change and
flat-line tests of the readings around it, and its ``qc_tests`` hold the
gross range test of its limit (other digits 9). It is the same reading
again only when censored again with the same limit.

Concurrent batches: on PostgreSQL a batch takes a transaction-scoped
advisory lock per station it writes (and per fluorometer its lab
chlorophyll-a re-qualifies), in one order, before reading any stored
neighbour, so two batches of one station are qualified one after the
other and each sees the other's readings (SQLite serialises writers
itself).
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from itertools import chain, repeat

import numpy as np
import pandas as pd
from sqlalchemy.engine import Connection

from monitor.ingest import qc
from monitor.ingest.dedupe import dedupe_batch, describe, same_readings
from monitor.ingest.parsing import Parsed
from monitor.ingest.qc_drift import DRIFT_BASELINE_DAYS, DRIFT_HOLD_DAYS, DRIFT_MATCH_WINDOW_H
from monitor.ingest.qc_flags import FAIL, SUSPECT
from monitor.ingest.station_locks import fluorometer_stations, lab_stations, lock_stations
from monitor.ingest.tables import Rejection
from monitor.store.db import param_marker
from monitor.timeutil import db_times, ns_from_days, ns_from_db, ns_from_hours

INSERT_CHUNK = 50_000  # rows per executemany when inserting readings


@dataclass
class _Stored:
    """Stored readings of one series (numpy arrays, in time order within each source)."""

    id: np.ndarray
    t: np.ndarray
    value: np.ndarray  # plain values; NaN for missing and censored readings
    qc_flag: np.ndarray
    qc_tests: np.ndarray
    source: np.ndarray
    censored: np.ndarray  # bool
    limit: np.ndarray  # a censored reading's detection limit (NaN: unknown, or not censored)
    whole_day: np.ndarray  # bool: a value for the local day ending at ``t``

    def __len__(self) -> int:
        return int(self.t.size)

    def subset(self, mask: np.ndarray) -> _Stored:
        return _Stored(self.id[mask], self.t[mask], self.value[mask], self.qc_flag[mask], self.qc_tests[mask],
                       self.source[mask], self.censored[mask], self.limit[mask], self.whole_day[mask])

    def number(self) -> np.ndarray:
        """The value, or a censored reading's limit: what a new reading at the same time is compared with."""
        return np.where(self.censored, self.limit, self.value)


@dataclass
class _SeriesResult:
    """What storing one (station, variable) series of a batch produced."""

    station: str
    variable: str
    span: tuple[int, int]  # [ns] first and last time of the batch's readings of the series
    t: np.ndarray  # new readings to insert [ns]
    value: np.ndarray  # the value, or a censored reading's detection limit
    censored: np.ndarray
    unit: np.ndarray
    whole_day: np.ndarray  # bool
    flag: np.ndarray
    tests: np.ndarray
    fills: list[tuple]  # (value, censored, limit, unit, flag, tests, batch, id) of stored missing readings filled in
    accepted: int
    flagged: int
    duplicate: int


def store_readings(conn: Connection, config, parsed: Parsed, source: str, batch_id: int,
                   rejections: list[Rejection]) -> tuple[int, int, int]:
    """Store a batch's readings with their QC flags; return (accepted, flagged, duplicate).

    source: the feed's source name, part of each reading's identity;
    rejections: the batch's rejections so far, extended in place.
    """
    if conn.dialect.name == "postgresql":
        lock_stations(conn, config, parsed.station)
    frame, duplicate = dedupe_batch(parsed, rejections, ["station", "variable", "t"])
    results = [_store_series(conn, config, parsed, source, batch_id, rejections, g) for g in _series_frames(frame)]
    accepted = sum(r.accepted for r in results)
    flagged = sum(r.flagged for r in results)
    duplicate += sum(r.duplicate for r in results)
    fills = [f for r in results for f in r.fills]
    if fills:
        ph = param_marker(conn)
        conn.exec_driver_sql(f"UPDATE readings SET value = {ph}, censored = {ph}, detection_limit = {ph}, "
                             f"unit = {ph}, qc_flag = {ph}, qc_tests = {ph}, batch_id = {ph} WHERE id = {ph}", fills)
    if results:
        inserted, offered = _insert_new(conn, results, source, batch_id)
        if inserted < offered:  # a concurrent batch stored some of them first
            duplicate += offered - inserted
            accepted -= offered - inserted
    lab_touched = {r.station: r.span for r in results if r.variable == "chlorophyll_a"}
    for lab_station, (t0, t1) in lab_touched.items():
        _requalify_fluorometers(conn, config, lab_station, t0, t1)
    return accepted, flagged, duplicate


def _series_frames(frame: pd.DataFrame) -> Iterator[pd.DataFrame]:
    """The rows of each (station, variable) series of a deduplicated batch, in order."""
    series = frame["series"].to_numpy()
    bounds = np.flatnonzero(np.diff(series)) + 1
    for lo, hi in zip(np.concatenate([[0], bounds]), np.concatenate([bounds, [series.size]])):
        if hi > lo:
            yield frame.iloc[lo:hi]


def _store_series(conn: Connection, config, parsed: Parsed, source: str, batch_id: int,
                  rejections: list[Rejection], g: pd.DataFrame) -> _SeriesResult:
    """Merge one series of the batch with the stored one, qualify both, update changed neighbours."""
    station, variable = g["station"].iat[0], g["variable"].iat[0]
    settings = qc.settings_for(config, station, variable)
    margin = ns_from_hours(qc.context_hours(settings))
    t_new = g["t"].to_numpy()
    v_new = g["value"].to_numpy()
    c_new = g["censored"].to_numpy(dtype=bool)
    u_new = g["unit"].to_numpy(dtype=object)
    t_min, t_max = int(t_new.min()), int(t_new.max())
    stored = _stored(conn, station, variable, source, t_min - 2 * margin, t_max + 2 * margin)
    keep, merged, fill_from, duplicate = _merge_stored(stored, g, parsed, rejections)
    fill_rows = fill_from >= 0
    n_stored = len(stored)
    censored_all = np.concatenate([merged.censored, c_new[keep]])
    limits_all = np.concatenate([merged.limit, np.where(c_new, v_new, np.nan)[keep]])
    plain_new = np.where(c_new, np.nan, v_new)[keep]
    flag_all, digits_all = _qualify_merged(conn, config, station, variable, settings, stored.t, merged.value,
                                           t_new[keep], plain_new, t_min, t_max, source)
    _censored_digits(digits_all, censored_all, limits_all, settings)
    in_range = (stored.t >= t_min - margin) & (stored.t <= t_max + margin) & ~fill_rows
    _update_neighbours(conn, stored, flag_all[:n_stored], digits_all[:n_stored], in_range)
    fills = []
    accepted = flagged = 0
    if fill_rows.any():
        tests = qc.digits_to_strings(digits_all[:n_stored])
        for j in np.nonzero(fill_rows)[0]:
            i = fill_from[j]
            fills.append((_db_float(merged.value[j]), int(c_new[i]), _db_float(merged.limit[j]), u_new[i],
                          int(flag_all[j]), str(tests[j]), batch_id, int(stored.id[j])))
            accepted += 1
            flagged += int(flag_all[j] in (SUSPECT, FAIL))
    f_new = flag_all[n_stored:]
    accepted += int(f_new.size)
    flagged += int(np.isin(f_new, (SUSPECT, FAIL)).sum())
    w_new = g["whole_day"].to_numpy(dtype=bool)
    return _SeriesResult(station, variable, (t_min, t_max), t_new[keep], v_new[keep], c_new[keep], u_new[keep],
                         w_new[keep], f_new, qc.digits_to_strings(digits_all[n_stored:]), fills, accepted, flagged, duplicate)


def _db_float(x: float) -> float | None:
    """A value for a bound parameter: None for NaN (every driver stores NULL)."""
    return None if x != x else float(x)


def _censored_digits(digits: np.ndarray, censored: np.ndarray, limits: np.ndarray, settings) -> None:
    """Censored readings (flag 9 from QC, having no value): the gross range test of their detection limit in
    the first digit, in place."""
    sel = censored & np.isfinite(limits)
    if sel.any():
        digits[sel, 0] = qc.gross_range(limits[sel], settings.get("sensor_min"), settings.get("sensor_max"),
                                        settings.get("user_min"), settings.get("user_max"))


def _merge_stored(stored: _Stored, g: pd.DataFrame, parsed: Parsed,
                  rejections: list[Rejection]) -> tuple[np.ndarray, _Stored, np.ndarray, int]:
    """Match the batch's readings of a series with stored ones at the same time (and both whole-day values or
    both instant readings: a whole-day value stamped at local midnight is not an instant reading then).

    Returns (keep: the batch readings that are new; the stored readings with
    missing ones filled in; fill_from: for each stored reading, the batch
    reading that fills it in, or -1; the number of duplicates); conflicts
    are appended to ``rejections``.
    """
    station, variable = g["station"].iat[0], g["variable"].iat[0]
    t_new = g["t"].to_numpy()
    v_new = g["value"].to_numpy()
    c_new = g["censored"].to_numpy(dtype=bool)
    line_new = g["line"].to_numpy()
    keep = np.ones(t_new.size, dtype=bool)
    merged = stored.subset(np.ones(len(stored), dtype=bool))
    fill_from = np.full(len(stored), -1, dtype=np.int64)
    duplicate = 0
    if not len(stored):
        return keep, merged, fill_from, duplicate
    number = stored.number()
    # key = (time, whole day) as one integer, 2·t + whole_day (times in ns since 1970 fit in int64 twice over)
    key_stored = 2 * stored.t + stored.whole_day.astype(np.int64)
    key_new = 2 * t_new.astype(np.int64) + g["whole_day"].to_numpy(dtype=bool).astype(np.int64)
    by_key = np.argsort(key_stored, kind="stable")
    pos = np.clip(np.searchsorted(key_stored[by_key], key_new), 0, len(stored) - 1)
    hit = key_stored[by_key][pos] == key_new
    for i in np.nonzero(hit)[0]:
        keep[i] = False
        j = by_key[pos[i]]
        old_missing = not merged.censored[j] and np.isnan(merged.value[j])
        if same_readings(np.array([v_new[i]]), np.array([c_new[i]]), np.array([number[j]]),
                         np.array([merged.censored[j]]))[0]:
            duplicate += 1
        elif old_missing:
            merged.censored[j] = c_new[i]
            merged.value[j] = np.nan if c_new[i] else v_new[i]
            merged.limit[j] = v_new[i] if c_new[i] else np.nan
            fill_from[j] = i
        elif not c_new[i] and np.isnan(v_new[i]):
            duplicate += 1  # a missing report of a reading already stored adds nothing
        else:
            rejections.append(Rejection(int(line_new[i]), parsed.raw_text(line_new[i]),
                                        f"{variable} at {station} conflicts with the stored reading "
                                        f"(stored {describe(number[j], merged.censored[j])}, "
                                        f"received {describe(v_new[i], c_new[i])})"))
    return keep, merged, fill_from, duplicate


def _qualify_merged(conn, config, station, variable, settings, stored_t, stored_v, new_t, new_v, t_min, t_max,
                    source) -> tuple[np.ndarray, np.ndarray]:
    """QC of stored + new readings [ns, value] together; flags and digits in the order stored, then new."""
    t_all = np.concatenate([stored_t, new_t])
    v_all = np.concatenate([stored_v, new_v])
    order = np.argsort(t_all, kind="stable")
    flag_s, digits_s = _qualify(conn, config, station, variable, settings, t_all[order], v_all[order],
                                t_min, t_max, source)
    flag_all = np.empty_like(flag_s)
    digits_all = np.empty_like(digits_s)
    flag_all[order] = flag_s
    digits_all[order] = digits_s
    return flag_all, digits_all


def _insert_new(conn: Connection, results: list[_SeriesResult], source: str, batch_id: int) -> tuple[int, int]:
    """Insert the new readings of every series; return (inserted, offered)."""
    d = conn.dialect.name
    t = np.concatenate([r.t for r in results])
    numbers = np.concatenate([r.value for r in results])
    censored = np.concatenate([r.censored for r in results])
    values = np.where(censored, np.nan, numbers)
    if np.isinf(numbers).any():
        raise ValueError("a reading's value or detection limit is infinite: refusing to store the batch")
    # SQLite stores a bound NaN as NULL; other drivers get None for a missing value
    value_list = values.tolist() if d == "sqlite" else [None if v != v else v for v in values.tolist()]
    limits = [_db_float(x) if c else None for x, c in zip(numbers.tolist(), censored.tolist())]
    stations = chain.from_iterable(repeat(r.station, r.t.size) for r in results)
    variables = chain.from_iterable(repeat(r.variable, r.t.size) for r in results)
    rows = list(zip(stations, variables, db_times(t, d), value_list, censored.astype(int).tolist(), limits,
                    np.concatenate([r.unit for r in results]).tolist(),
                    np.concatenate([r.flag for r in results]).astype(int).tolist(),
                    np.concatenate([r.tests for r in results]).tolist(),
                    np.concatenate([r.whole_day for r in results]).astype(int).tolist(),
                    repeat(source), repeat(batch_id)))
    return _insert_readings(conn, rows), len(rows)


def _insert_readings(conn: Connection, rows: list[tuple]) -> int:
    """Insert (station, variable, time, value, censored, detection limit, unit, flag, tests, whole day,
    source, batch) rows; return how many were new."""
    ph = param_marker(conn)
    sql = (f"INSERT INTO readings (station_id, variable, time_utc, value, censored, detection_limit, unit, "
           f"qc_flag, qc_tests, whole_day, source, batch_id) "
           f"VALUES ({ph}, {ph}, {ph}, {ph}, {ph}, {ph}, {ph}, {ph}, {ph}, {ph}, {ph}, {ph}) "
           f"ON CONFLICT (station_id, variable, time_utc, source, whole_day) DO NOTHING")
    total = 0
    for k in range(0, len(rows), INSERT_CHUNK):
        part = rows[k:k + INSERT_CHUNK]
        cur = conn.exec_driver_sql(sql, part)
        total += cur.rowcount if cur.rowcount is not None and cur.rowcount >= 0 else len(part)
    return total


# --------------------------------------------------------------------------
# Stored neighbours


def _stored(conn: Connection, station: str, variable: str, source: str | None, t0: int, t1: int) -> _Stored:
    """Stored readings of one series with t0 <= time <= t1 [ns], ordered by time."""
    d = conn.dialect.name
    ph = param_marker(conn)
    lo, hi = db_times(np.array([t0, t1]), d)
    sql = (f"SELECT id, time_utc, value, qc_flag, qc_tests, source, censored, detection_limit, whole_day FROM readings "
           f"WHERE station_id = {ph} AND variable = {ph} AND time_utc >= {ph} AND time_utc <= {ph}")
    params = [station, variable, lo, hi]
    if source is not None:
        sql += f" AND source = {ph}"
        params.append(source)
    rows = conn.exec_driver_sql(sql + " ORDER BY time_utc", tuple(params)).fetchall()
    if not rows:
        e = np.array([], dtype=np.int64)
        f = np.array([], dtype=float)
        return _Stored(e, e, f, e, np.array([], dtype=object), np.array([], dtype=object),
                       np.array([], dtype=bool), f, np.array([], dtype=bool))
    ids, times, values, flags, tests, sources, censored, limits, whole_day = zip(*rows)
    cens = np.asarray(censored, dtype=np.int64) != 0
    return _Stored(np.asarray(ids, dtype=np.int64), ns_from_db(times, d),
                   np.array([np.nan if v is None else v for v in values], dtype=float),
                   np.asarray(flags, dtype=np.int64), np.asarray(tests, dtype=object),
                   np.asarray(sources, dtype=object), cens,
                   np.array([np.nan if x is None else x for x in limits], dtype=float),
                   np.asarray(whole_day, dtype=np.int64) != 0)


def _update_neighbours(conn: Connection, stored: _Stored, flag, digits, in_range: np.ndarray) -> None:
    """Write back stored readings whose QC result changed."""
    if not len(stored):
        return
    tests = qc.digits_to_strings(digits)
    old_flag = stored.qc_flag
    old_tests = stored.qc_tests
    changed = in_range & ((flag != old_flag) | (tests != old_tests))
    if not changed.any():
        return
    ph = param_marker(conn)
    conn.exec_driver_sql(f"UPDATE readings SET qc_flag = {ph}, qc_tests = {ph} WHERE id = {ph}",
                         [(int(f), str(s), int(i)) for f, s, i in
                          zip(flag[changed], tests[changed], stored.id[changed])])


# --------------------------------------------------------------------------
# Fluorometers and the lab chlorophyll-a that checks them


def _lab_series(conn: Connection, config, station_id: str, t0: int, t1: int) -> tuple[np.ndarray, np.ndarray]:
    """Lab chlorophyll-a [ns, µg/L] bearing on a station's fluorometer in [t0, t1], QC flag 1-3, in time order."""
    times, values = [], []
    for lab in lab_stations(config, station_id):
        got = _stored(conn, lab, "chlorophyll_a", None, t0, t1)
        got = got.subset(np.isin(got.qc_flag, [1, 2, 3]) & np.isfinite(got.value))
        times.append(got.t)
        values.append(got.value)
    if not times:
        return np.array([], dtype=np.int64), np.array([])
    t = np.concatenate(times)
    order = np.argsort(t, kind="stable")
    return t[order], np.concatenate(values)[order]


def _qualify(conn, config, station, variable, settings, t, v, t_min, t_max, source):
    """QC of the series (t, v) [ns, value].

    For a fluorometer the drift check needs the lab chlorophyll-a that can
    bear on readings in [t_min, t_max] (with the baseline before them) and
    the sensor readings around those samples: the stored ones of the same
    source, overridden by the series being qualified.
    """
    if variable != "chlorophyll_fluorescence" or settings.get("drift_suspect_fraction") is None:
        return qc.run_qc(t, v, settings)
    w = ns_from_hours(DRIFT_MATCH_WINDOW_H)
    # the comparison governing a reading, its previous one and their baselines
    back = ns_from_days(2 * DRIFT_HOLD_DAYS + DRIFT_BASELINE_DAYS) + 2 * w
    # a later sample within the hold time can confirm (or not) the comparison before it
    lab_t, lab_v = _lab_series(conn, config, station, t_min - back, t_max + ns_from_days(DRIFT_HOLD_DAYS) + 2 * w)
    if lab_t.size == 0:
        return qc.run_qc(t, v, settings)
    around = _stored(conn, station, variable, source, int(lab_t.min()) - w, int(lab_t.max()) + w)
    other = ~np.isin(around.t, t)
    d_t = np.concatenate([around.t[other], t])
    d_v = np.concatenate([around.value[other], v])
    return qc.run_qc(t, v, settings, lab_t, lab_v, d_t, d_v)


def _requalify_fluorometers(conn: Connection, config, lab_station: str, t0: int, t1: int) -> None:
    """New lab chlorophyll-a in [t0, t1] [ns]: re-run QC of the fluorometers it checks, over the readings it affects."""
    window = ns_from_hours(DRIFT_MATCH_WINDOW_H)
    hold = ns_from_days(DRIFT_HOLD_DAYS)
    for station in fluorometer_stations(config, lab_station):
        settings = qc.settings_for(config, station, "chlorophyll_fluorescence")
        if settings.get("drift_suspect_fraction") is None:
            continue
        margin = ns_from_hours(qc.context_hours(settings))
        # comparisons at [t0, t1] and, through the baseline, those up to DRIFT_BASELINE_DAYS later
        # readings after the previous comparison (its confirmation may change) up to those after the
        # comparisons whose baseline includes [t0, t1]
        lo = t0 - hold - 2 * window
        hi = t1 + ns_from_days(DRIFT_BASELINE_DAYS) + 2 * hold + window
        stored = _stored(conn, station, "chlorophyll_fluorescence", None, lo - margin, hi + margin)
        for source in dict.fromkeys(stored.source.tolist()):
            g = stored.subset(stored.source == source)  # in time order, as queried
            flag, digits = _qualify(conn, config, station, "chlorophyll_fluorescence", settings, g.t, g.value,
                                    lo, hi, source)
            _censored_digits(digits, g.censored, g.limit, settings)
            _update_neighbours(conn, g, flag, digits, (g.t >= lo) & (g.t <= hi))
