"""One ingest batch: parse → convert → QC → store, atomically, losing nothing.

* The raw payload is archived under ``<archive_dir>/<feed>/<sha256[:2]>/``
  named by its SHA-256 before anything is stored, and the batch row keeps
  the hash and the archive path.
* Everything a batch writes (its batch row, readings, rejected rows, the
  re-evaluated QC flags of stored neighbours) is one database transaction:
  a batch is stored whole or not at all.
* Idempotent: a reading is identified by (station, variable, time, source);
  the same reading again is counted as a duplicate and stored once. A
  different value for a stored reading is rejected with the stored value in
  the reason (nothing is silently overwritten), except that a stored
  *missing* reading (QC flag 9) is filled in by a later value.
* Counts: ``received == accepted + rejected + duplicate``; ``flagged`` is
  the number of accepted readings with QC flag 3 or 4.

QC (:mod:`monitor.ingest.qc`) runs per station and variable on the batch's
readings together with the stored readings around them, so spikes and flat
lines across file boundaries are seen; stored neighbours whose flags change
are updated in the same transaction.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import os
import re
import shutil
import tempfile
from collections import Counter
from dataclasses import dataclass
from itertools import repeat
from pathlib import Path
from typing import Callable, Iterable

import numpy as np
import pandas as pd
from sqlalchemy import insert, select, update
from sqlalchemy.engine import Connection, Engine

from monitor.ingest import qc
from monitor.ingest.parsing import Parsed, parse_payload
from monitor.ingest.qc_drift import DRIFT_BASELINE_DAYS, DRIFT_HOLD_DAYS, DRIFT_MATCH_WINDOW_H
from monitor.ingest.tables import Rejection, clean_text
from monitor.store.schema import ingest_batches, rejected_rows
from monitor.timeutil import now_utc

Progress = Callable[[int, int, "BatchResult"], None]

_NS_PER_H = 3_600_000_000_000
_SQLITE_TIME = "%Y-%m-%d %H:%M:%S.%f"


@dataclass
class BatchResult:
    batch_id: int | None
    feed: str
    origin: str
    status: str  # ok | partial | rejected | failed
    received: int = 0
    accepted: int = 0
    flagged: int = 0
    rejected: int = 0
    duplicate: int = 0
    message: str = ""

    def as_dict(self) -> dict:
        return {k: getattr(self, k) for k in ("batch_id", "feed", "origin", "status", "received", "accepted",
                                              "flagged", "rejected", "duplicate", "message")}


# --------------------------------------------------------------------------
# Time columns in the database (UTCDateTime: naive UTC)


def db_times(ns: np.ndarray, dialect: str) -> list:
    """int64 ns UTC → the values the driver stores for a UTCDateTime column."""
    ns = np.asarray(ns, dtype=np.int64)
    if ns.size == 0:
        return []
    uniq, inverse = np.unique(ns, return_inverse=True)
    us = uniq.astype("datetime64[ns]").astype("datetime64[us]")
    if dialect == "sqlite":
        # SQLAlchemy's SQLite DateTime storage format: "YYYY-MM-DD HH:MM:SS.ffffff"
        text = np.char.replace(np.datetime_as_string(us, unit="us").astype(str), "T", " ")
        return text[inverse].tolist()
    objs = np.array(us.tolist(), dtype=object)
    return objs[inverse].tolist()


def ns_from_db(values: Iterable, dialect: str) -> np.ndarray:
    """Stored UTCDateTime values (strings in SQLite, datetimes elsewhere) → int64 ns UTC."""
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


def _ph(conn: Connection) -> str:
    return "?" if conn.dialect.paramstyle == "qmark" else "%s"


# --------------------------------------------------------------------------
# Archive


def archive_payload(archive_dir: Path, feed: str, payload: bytes, sha: str, suffix: str) -> Path:
    """Write ``payload`` once under its SHA-256 (atomic rename); return its path."""
    folder = Path(archive_dir) / _safe(feed) / sha[:2]
    path = folder / f"{sha}{suffix}"
    if path.exists():
        return path
    folder.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=".incoming-")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(payload)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path


def _safe(name: str) -> str:
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", name) or "feed"


def _suffix(feed, origin: str) -> str:
    suffix = Path(origin.split("?")[0]).suffix.lower()
    if suffix in (".csv", ".json", ".txt", ".tsv", ".dat"):
        return suffix
    return ".json" if feed.format == "json" else ".csv"


# --------------------------------------------------------------------------
# Batches


def ingest_bytes(engine: Engine, config, feed, payload: bytes, origin: str, *,
                 now: dt.datetime | None = None) -> BatchResult:
    """Ingest one payload of ``feed`` as one atomic batch; return its counts.

    engine: the store; config: the :class:`monitor.config.Config`; feed: its
    :class:`monitor.config.FeedConfig`; payload: the raw bytes as received;
    origin: where they came from (file path, URL, push client, MQTT topic).
    A failure inside the batch rolls it back and is recorded as a batch with
    status ``failed``.
    """
    now = now or now_utc()
    sha = hashlib.sha256(payload).hexdigest()
    try:
        archive = archive_payload(config.service.archive_dir, feed.name, payload, sha, _suffix(feed, origin))
    except OSError as exc:
        return _failed(engine, feed, origin, sha, None, now, f"could not archive the payload: {exc}")
    parsed = parse_payload(payload, feed, config, origin=origin, now=now)
    try:
        with engine.begin() as conn:
            return _store_batch(conn, config, feed, origin, sha, archive, parsed, now)
    except Exception as exc:  # the transaction rolled back: record the failure, keep the service going
        return _failed(engine, feed, origin, sha, archive, now, f"{type(exc).__name__}: {exc}")


def _failed(engine, feed, origin, sha, archive, now, message) -> BatchResult:
    message = clean_text(message)
    try:
        with engine.begin() as conn:
            batch_id = conn.execute(insert(ingest_batches).values(
                feed=feed.name, origin=clean_text(origin), sha256=sha,
                archive_path=str(archive) if archive else None, received_at=now, status="failed",
                message=message, received=0, accepted=0, flagged=0, rejected=0, duplicate=0)
            ).inserted_primary_key[0]
    except Exception:  # the store itself is down: report without a batch id
        batch_id = None
    return BatchResult(batch_id, feed.name, origin, "failed", message=message)


SQLITE_CACHE_KIB = 65536  # page cache for a batch's connection: the readings index stays in memory


def _store_batch(conn: Connection, config, feed, origin, sha, archive, parsed: Parsed, now) -> BatchResult:
    if conn.dialect.name == "sqlite":
        conn.exec_driver_sql(f"PRAGMA cache_size = -{SQLITE_CACHE_KIB}")
    batch_id = conn.execute(insert(ingest_batches).values(
        feed=feed.name, origin=clean_text(origin), sha256=sha, archive_path=str(archive),
        received_at=now, status="running", message="", received=0, accepted=0, flagged=0,
        rejected=0, duplicate=0)).inserted_primary_key[0]
    source = feed.source or feed.name
    rejections: list[Rejection] = list(parsed.rejected)
    if feed.role == "weather-forecast":
        accepted, flagged, duplicate = _store_forecasts(conn, config, parsed, source, batch_id, rejections)
    else:
        accepted, flagged, duplicate = _store_readings(conn, config, parsed, source, batch_id, rejections)
    if rejections:
        conn.execute(insert(rejected_rows), [
            {"batch_id": batch_id, "line": r.line, "raw": r.raw, "reason": clean_text(r.reason)}
            for r in rejections])
    rejected = len(rejections)
    received = accepted + rejected + duplicate
    status = "ok" if rejected == 0 else ("partial" if accepted + duplicate > 0 else "rejected")
    message = _message(accepted, flagged, rejected, duplicate, rejections, parsed.notes)
    conn.execute(update(ingest_batches).where(ingest_batches.c.id == batch_id).values(
        status=status, message=message, received=received, accepted=accepted, flagged=flagged,
        rejected=rejected, duplicate=duplicate))
    return BatchResult(batch_id, feed.name, origin, status, received, accepted, flagged, rejected, duplicate, message)


def _message(accepted, flagged, rejected, duplicate, rejections, notes) -> str:
    parts = [f"{accepted} accepted ({flagged} flagged suspect or failed), {rejected} rejected, {duplicate} duplicate"]
    if rejections:
        top = Counter(reason_kind(r.reason) for r in rejections).most_common(3)
        parts.append("rejected: " + "; ".join(f"{n} × {reason}" for reason, n in top))
    parts.extend(notes)
    return ". ".join(parts)


def reason_kind(reason: str) -> str:
    """A rejection reason with its quoted specifics removed, for counting kinds of reasons."""
    return re.sub(r"'[^']*'|\"[^\"]*\"|\d+(?:\.\d+)?", "…", reason)


# --------------------------------------------------------------------------
# Readings


def _same(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    both_nan = np.isnan(a) & np.isnan(b)
    with np.errstate(invalid="ignore"):
        close = np.abs(a - b) <= 1e-9 * np.maximum(1.0, np.abs(b))
    return both_nan | close


def _dedupe_batch(parsed: Parsed, rejections: list[Rejection], keys: list[str]) -> tuple[pd.DataFrame, int]:
    """Drop repeats inside the batch: equal values are duplicates, differing ones rejections.

    Returns the remaining readings sorted by station, variable, (issue time,)
    time, with an integer column ``series`` numbering the (station,
    variable) series in that order, and the number of duplicates.
    """
    issued = "issued" in keys
    n = parsed.value.size
    st_codes, st_names = pd.factorize(parsed.station, sort=True)
    var_codes, var_names = pd.factorize(parsed.variable, sort=True)
    sort_keys = [parsed.line, parsed.time_ns] + ([parsed.issued_ns] if issued else []) + [var_codes, st_codes]
    order = np.lexsort(sort_keys) if n else np.array([], dtype=np.int64)
    st_c, var_c, t = st_codes[order], var_codes[order], parsed.time_ns[order]
    value, line = parsed.value[order], parsed.line[order]
    same_key = np.zeros(n, dtype=bool)
    if n > 1:
        same_key[1:] = (st_c[1:] == st_c[:-1]) & (var_c[1:] == var_c[:-1]) & (t[1:] == t[:-1])
        if issued:
            iss = parsed.issued_ns[order]
            same_key[1:] &= iss[1:] == iss[:-1]
    duplicate = 0
    if same_key.any():
        first = np.maximum.accumulate(np.where(same_key, 0, np.arange(n)))
        equal = _same(value, value[first])
        conflict = same_key & ~equal
        for i in np.nonzero(conflict)[0]:
            j = first[i]
            rejections.append(Rejection(int(line[i]), _raw(parsed, line[i]),
                                        f"{var_names[var_c[i]]} at the same time as line {line[j]} "
                                        f"with another value ({value[i]!r} vs {value[j]!r})"))
        duplicate = int((same_key & equal).sum())
    keep = ~same_key
    series = (st_c.astype(np.int64) * max(len(var_names), 1) + var_c)[keep]
    frame = pd.DataFrame({"station": np.asarray(st_names, dtype=object)[st_c[keep]] if n else np.array([], dtype=object),
                          "variable": np.asarray(var_names, dtype=object)[var_c[keep]] if n else np.array([], dtype=object),
                          "t": t[keep], "value": value[keep], "line": line[keep], "series": series})
    if issued:
        frame["issued"] = parsed.issued_ns[order][keep]
    return frame, duplicate


def _raw(parsed: Parsed, line) -> str:
    return clean_text(parsed.raw.get(int(line), ""))


@dataclass
class _Stored:
    """Stored readings of one series (numpy arrays, in time order within each source)."""

    id: np.ndarray
    t: np.ndarray
    value: np.ndarray
    qc_flag: np.ndarray
    qc_tests: np.ndarray
    source: np.ndarray

    def __len__(self) -> int:
        return int(self.t.size)

    def subset(self, mask: np.ndarray) -> "_Stored":
        return _Stored(self.id[mask], self.t[mask], self.value[mask], self.qc_flag[mask], self.qc_tests[mask],
                       self.source[mask])


def _stored(conn: Connection, station: str, variable: str, source: str | None, t0: int, t1: int) -> _Stored:
    """Stored readings of one series with t0 <= time <= t1 [ns], ordered by time."""
    d = conn.dialect.name
    ph = _ph(conn)
    lo, hi = db_times(np.array([t0, t1]), d)
    sql = (f"SELECT id, time_utc, value, qc_flag, qc_tests, source FROM readings "
           f"WHERE station_id = {ph} AND variable = {ph} AND time_utc >= {ph} AND time_utc <= {ph}")
    params = [station, variable, lo, hi]
    if source is not None:
        sql += f" AND source = {ph}"
        params.append(source)
    rows = conn.exec_driver_sql(sql + " ORDER BY time_utc", tuple(params)).fetchall()
    if not rows:
        e = np.array([], dtype=np.int64)
        return _Stored(e, e, np.array([], dtype=float), e, np.array([], dtype=object), np.array([], dtype=object))
    ids, times, values, flags, tests, sources = zip(*rows)
    return _Stored(np.asarray(ids, dtype=np.int64), ns_from_db(times, d),
                   np.array([np.nan if v is None else v for v in values], dtype=float),
                   np.asarray(flags, dtype=np.int64), np.asarray(tests, dtype=object),
                   np.asarray(sources, dtype=object))


def _lab_stations(config, station_id: str) -> list[str]:
    """Stations whose extracted chlorophyll-a checks this station's fluorometer: itself and lab stations in its basin."""
    out = [station_id]
    me = next((s for s in getattr(config, "stations", ()) if s.id == station_id), None)
    if me is not None and me.basin is not None:
        out += [s.id for s in config.stations if s.id != station_id and s.kind == "lab"
                and s.water_body == me.water_body and s.basin == me.basin]
    return out


def _fluorometer_stations(config, lab_station_id: str) -> list[str]:
    """Stations whose fluorometers a lab station's chlorophyll-a checks (the inverse of :func:`_lab_stations`)."""
    return [s.id for s in getattr(config, "stations", ()) if lab_station_id in _lab_stations(config, s.id)]


def _lab_series(conn: Connection, config, station_id: str, t0: int, t1: int) -> tuple[np.ndarray, np.ndarray]:
    times, values = [], []
    for lab in _lab_stations(config, station_id):
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
    w = int(DRIFT_MATCH_WINDOW_H * _NS_PER_H)
    # the comparison governing a reading, its previous one and their baselines
    back = int((2 * DRIFT_HOLD_DAYS + DRIFT_BASELINE_DAYS) * 24 * _NS_PER_H) + 2 * w
    # a later sample within the hold time can confirm (or not) the comparison before it
    lab_t, lab_v = _lab_series(conn, config, station, t_min - back,
                               t_max + int(DRIFT_HOLD_DAYS * 24 * _NS_PER_H) + 2 * w)
    if lab_t.size == 0:
        return qc.run_qc(t, v, settings)
    around = _stored(conn, station, variable, source, int(lab_t.min()) - w, int(lab_t.max()) + w)
    other = ~np.isin(around.t, t)
    d_t = np.concatenate([around.t[other], t])
    d_v = np.concatenate([around.value[other], v])
    return qc.run_qc(t, v, settings, lab_t, lab_v, d_t, d_v)


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
    ph = _ph(conn)
    conn.exec_driver_sql(f"UPDATE readings SET qc_flag = {ph}, qc_tests = {ph} WHERE id = {ph}",
                         [(int(f), str(s), int(i)) for f, s, i in
                          zip(flag[changed], tests[changed], stored.id[changed])])


def _store_readings(conn: Connection, config, parsed: Parsed, source: str, batch_id: int,
                    rejections: list[Rejection]) -> tuple[int, int, int]:
    frame, duplicate = _dedupe_batch(parsed, rejections, ["station", "variable", "t"])
    d = conn.dialect.name
    accepted = flagged = 0
    out_t, out_station, out_variable, out_value, out_flag, out_tests = [], [], [], [], [], []
    fills = []  # (value, flag, tests, batch, id) for stored missing readings filled in
    lab_touched: dict[str, tuple[int, int]] = {}
    series = frame["series"].to_numpy()
    bounds = np.flatnonzero(np.diff(series)) + 1
    for lo, hi in zip(np.concatenate([[0], bounds]), np.concatenate([bounds, [series.size]])):
        if hi <= lo:
            continue
        g = frame.iloc[lo:hi]
        station, variable = g["station"].iat[0], g["variable"].iat[0]
        settings = qc.settings_for(config, station, variable)
        margin = int(qc.context_hours(settings) * _NS_PER_H)
        t_new = g["t"].to_numpy()
        v_new = g["value"].to_numpy()
        line_new = g["line"].to_numpy()
        t_min, t_max = int(t_new.min()), int(t_new.max())
        stored = _stored(conn, station, variable, source, t_min - 2 * margin, t_max + 2 * margin)
        keep = np.ones(t_new.size, dtype=bool)
        stored_values = stored.value.copy()
        fill_rows = np.zeros(len(stored), dtype=bool)
        if len(stored):
            pos = np.searchsorted(stored.t, t_new)
            pos_c = np.clip(pos, 0, len(stored) - 1)
            hit = stored.t[pos_c] == t_new
            for i in np.nonzero(hit)[0]:
                keep[i] = False
                j = pos_c[i]
                old = stored_values[j]
                if _same(np.array([v_new[i]]), np.array([old]))[0]:
                    duplicate += 1
                elif np.isnan(old):
                    stored_values[j] = v_new[i]
                    fill_rows[j] = True
                elif np.isnan(v_new[i]):
                    duplicate += 1  # a missing report of a reading already stored adds nothing
                else:
                    rejections.append(Rejection(int(line_new[i]), _raw(parsed, line_new[i]),
                                                f"{variable} at {station} conflicts with the stored reading "
                                                f"(stored {old!r}, received {v_new[i]!r})"))
        t_all = np.concatenate([stored.t, t_new[keep]])
        v_all = np.concatenate([stored_values, v_new[keep]])
        order = np.argsort(t_all, kind="stable")
        flag_s, digits_s = _qualify(conn, config, station, variable, settings, t_all[order], v_all[order],
                                    t_min, t_max, source)
        flag_all = np.empty_like(flag_s)
        digits_all = np.empty_like(digits_s)
        flag_all[order] = flag_s
        digits_all[order] = digits_s
        n_stored = len(stored)
        st_t = stored.t
        in_range = (st_t >= t_min - margin) & (st_t <= t_max + margin) & ~fill_rows
        _update_neighbours(conn, stored, flag_all[:n_stored], digits_all[:n_stored], in_range)
        if fill_rows.any():
            tests = qc.digits_to_strings(digits_all[:n_stored])
            for j in np.nonzero(fill_rows)[0]:
                fills.append((float(stored_values[j]), int(flag_all[j]), str(tests[j]), batch_id,
                              int(stored.id[j])))
                accepted += 1
                flagged += int(flag_all[j] in (3, 4))
        f_new = flag_all[n_stored:]
        out_t.append(t_new[keep])
        out_station.extend([station] * f_new.size)
        out_variable.extend([variable] * f_new.size)
        out_value.append(v_new[keep])
        out_flag.append(f_new)
        out_tests.append(qc.digits_to_strings(digits_all[n_stored:]))
        accepted += int(f_new.size)
        flagged += int(np.isin(f_new, (3, 4)).sum())
        if variable == "chlorophyll_a":
            lab_touched[station] = (t_min, t_max)
    if fills:
        ph = _ph(conn)
        conn.exec_driver_sql(f"UPDATE readings SET value = {ph}, qc_flag = {ph}, qc_tests = {ph}, batch_id = {ph} "
                             f"WHERE id = {ph}", fills)
    if out_t:
        t = np.concatenate(out_t)
        values = np.concatenate(out_value)
        # SQLite stores a bound NaN as NULL; other drivers get None for a missing value
        value_list = values.tolist() if d == "sqlite" else [None if v != v else v for v in values.tolist()]
        rows = list(zip(out_station, out_variable,
                        db_times(t, d), value_list, np.concatenate(out_flag).astype(int).tolist(),
                        np.concatenate(out_tests).tolist(), repeat(source), repeat(batch_id)))
        inserted = _insert_readings(conn, rows)
        if inserted < len(rows):  # a concurrent batch stored some of them first
            duplicate += len(rows) - inserted
            accepted -= len(rows) - inserted
    for lab_station, (t0, t1) in lab_touched.items():
        _requalify_fluorometers(conn, config, lab_station, t0, t1)
    return accepted, flagged, duplicate


def _insert_readings(conn: Connection, rows: list[tuple]) -> int:
    """Insert (station, variable, time, value, flag, tests, source, batch) rows; return how many were new."""
    ph = _ph(conn)
    sql = (f"INSERT INTO readings (station_id, variable, time_utc, value, qc_flag, qc_tests, source, batch_id) "
           f"VALUES ({ph}, {ph}, {ph}, {ph}, {ph}, {ph}, {ph}, {ph}) "
           f"ON CONFLICT (station_id, variable, time_utc, source) DO NOTHING")
    total = 0
    chunk = 50_000
    for k in range(0, len(rows), chunk):
        part = rows[k:k + chunk]
        cur = conn.exec_driver_sql(sql, part)
        total += cur.rowcount if cur.rowcount is not None and cur.rowcount >= 0 else len(part)
    return total


def _requalify_fluorometers(conn: Connection, config, lab_station: str, t0: int, t1: int) -> None:
    """New lab chlorophyll-a: re-run QC of the fluorometers it checks, over the readings it affects."""
    window = int(DRIFT_MATCH_WINDOW_H * _NS_PER_H)
    hold = int(DRIFT_HOLD_DAYS * 24 * _NS_PER_H)
    for station in _fluorometer_stations(config, lab_station):
        settings = qc.settings_for(config, station, "chlorophyll_fluorescence")
        if settings.get("drift_suspect_fraction") is None:
            continue
        margin = int(qc.context_hours(settings) * _NS_PER_H)
        # comparisons at [t0, t1] and, through the baseline, those up to DRIFT_BASELINE_DAYS later
        # readings after the previous comparison (its confirmation may change) up to those after the
        # comparisons whose baseline includes [t0, t1]
        lo = t0 - hold - 2 * window
        hi = t1 + int(DRIFT_BASELINE_DAYS * 24 * _NS_PER_H) + 2 * hold + window
        stored = _stored(conn, station, "chlorophyll_fluorescence", None, lo - margin, hi + margin)
        for source in dict.fromkeys(stored.source.tolist()):
            g = stored.subset(stored.source == source)  # in time order, as queried
            flag, digits = _qualify(conn, config, station, "chlorophyll_fluorescence", settings, g.t, g.value,
                                    lo, hi, source)
            _update_neighbours(conn, g, flag, digits, (g.t >= lo) & (g.t <= hi))


# --------------------------------------------------------------------------
# Weather forecasts (driver_forecasts)


def _store_forecasts(conn: Connection, config, parsed: Parsed, source: str, batch_id: int,
                     rejections: list[Rejection]) -> tuple[int, int, int]:
    from monitor.store.schema import driver_forecasts

    frame, duplicate = _dedupe_batch(parsed, rejections, ["station", "variable", "issued", "t"])
    if frame.empty:
        return 0, 0, duplicate
    keep = np.ones(len(frame), dtype=bool)
    values = frame["value"].to_numpy()
    for i in np.nonzero(np.isnan(values))[0]:
        keep[i] = False
        rejections.append(Rejection(int(frame.at[i, "line"]), _raw(parsed, frame.at[i, "line"]), f"missing {frame.at[i, 'variable']} value"))
    for variable, idx in frame.groupby("variable", sort=False).indices.items():
        s = qc.thresholds(variable, getattr(config, "qc", {}).get(variable))
        fl = qc.gross_range(values[idx], s.get("sensor_min"), s.get("sensor_max"))
        for i in idx[(fl == qc.FAIL) & keep[idx]]:
            keep[i] = False
            rejections.append(Rejection(int(frame.at[i, "line"]), _raw(parsed, frame.at[i, "line"]),
                                        f"{variable} {values[i]!r} is outside the sensor range "
                                        f"[{s.get('sensor_min')}, {s.get('sensor_max')}]"))
    d = conn.dialect.name
    # stored keys of this station/source with these issue times
    existing: set[tuple] = set()
    issued_unique = np.unique(frame["issued"].to_numpy())
    for station in frame["station"].unique():
        rows = conn.execute(select(driver_forecasts.c.variable, driver_forecasts.c.issued_utc,
                                   driver_forecasts.c.valid_utc, driver_forecasts.c.value).where(
            driver_forecasts.c.station_id == station, driver_forecasts.c.source == source,
            driver_forecasts.c.issued_utc >= _aware(issued_unique.min()),
            driver_forecasts.c.issued_utc <= _aware(issued_unique.max()))).fetchall()
        for var, iss, val, value in rows:
            existing.add((station, var, _ns(iss), _ns(val)))
    out = []
    f = frame[keep]
    for st, var, iss, t, value in zip(f["station"], f["variable"], f["issued"], f["t"], f["value"]):
        if (st, var, int(iss), int(t)) in existing:
            duplicate += 1
            continue
        out.append((st, var, iss, t, value))
    if out:
        st, var, iss, t, value = zip(*out)
        ph = _ph(conn)
        conn.exec_driver_sql(
            f"INSERT INTO driver_forecasts (station_id, variable, issued_utc, valid_utc, value, source, batch_id) "
            f"VALUES ({ph}, {ph}, {ph}, {ph}, {ph}, {ph}, {ph})",
            list(zip(st, var, db_times(np.array(iss), d), db_times(np.array(t), d), [float(x) for x in value],
                     [source] * len(out), [batch_id] * len(out))))
    return len(out), 0, duplicate


def _aware(ns: int) -> dt.datetime:
    return pd.Timestamp(int(ns), tz="UTC").to_pydatetime()


def _ns(t: dt.datetime) -> int:
    return pd.Timestamp(t).tz_convert("UTC").value if pd.Timestamp(t).tzinfo else pd.Timestamp(t).value


# --------------------------------------------------------------------------
# Files and folders


def ingest_path(engine: Engine, config, feed, path, *, now: dt.datetime | None = None) -> BatchResult:
    """Ingest one file; a csv-folder feed with ``archive = true`` then moves it out of the drop folder."""
    path = Path(path)
    try:
        payload = path.read_bytes()
    except OSError as exc:
        return BatchResult(None, feed.name, str(path), "failed", message=f"cannot read {path}: {exc.strerror or exc}")
    result = ingest_bytes(engine, config, feed, payload, str(path), now=now)
    if result.status != "failed" and feed.kind == "csv-folder" and feed.archive and feed.path is not None:
        _move_done(config, feed, path)
    return result


def _move_done(config, feed, path: Path) -> None:
    try:
        rel = path.resolve().relative_to(Path(feed.path).resolve())
    except ValueError:
        return  # not in the drop folder: a one-off load leaves the file where it is
    target = Path(config.service.archive_dir) / _safe(feed.name) / "processed" / rel
    target.parent.mkdir(parents=True, exist_ok=True)
    shutil.move(str(path), str(target))


def feed_files(feed) -> list[Path]:
    """The files of a csv-folder feed matching its pattern, in name order."""
    if feed.path is None or not Path(feed.path).is_dir():
        return []
    return sorted(p for p in Path(feed.path).glob(feed.pattern) if p.is_file() and not p.name.startswith("."))


def ingested_hashes(engine: Engine, feed_name: str) -> set[str]:
    """SHA-256 of every payload of ``feed_name`` already stored by a batch that did not fail."""
    with engine.connect() as conn:
        rows = conn.execute(select(ingest_batches.c.sha256).where(
            ingest_batches.c.feed == feed_name, ingest_batches.c.status != "failed")).fetchall()
    return {r[0] for r in rows}


def ingest_feed(engine: Engine, config, feed, *, progress: Progress | None = None,
                now: dt.datetime | None = None) -> list[BatchResult]:
    """Ingest every new file of a csv-folder feed (new = its SHA-256 not yet stored for this feed)."""
    if feed.kind != "csv-folder":
        raise ValueError(f"feed {feed.name!r} is a {feed.kind} feed; ingest_feed reads csv-folder feeds")
    seen = ingested_hashes(engine, feed.name)
    files = feed_files(feed)
    results = []
    for i, path in enumerate(files, start=1):
        try:
            digest = hashlib.sha256(path.read_bytes()).hexdigest()
        except OSError:
            digest = None
        if digest is not None and digest in seen:
            if feed.archive:
                _move_done(config, feed, path)
            continue
        result = ingest_path(engine, config, feed, path, now=now)
        results.append(result)
        if digest is not None and result.status != "failed":
            seen.add(digest)
        if progress is not None:
            progress(i, len(files), result)
    return results


def ingest_all(engine: Engine, config, *, progress: Progress | None = None,
               now: dt.datetime | None = None) -> list[BatchResult]:
    """Ingest the new files of every csv-folder feed in the config."""
    results = []
    for feed in config.feeds:
        if feed.kind == "csv-folder":
            results.extend(ingest_feed(engine, config, feed, progress=progress, now=now))
    return results
