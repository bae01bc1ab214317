"""Storing a weather-forecast batch in ``driver_forecasts``.

A forecast value is identified by (station, variable, issue time, valid
time, source). Missing values, censored values (below a detection limit)
and values outside the sensor range (the QARTOD gross range test's fail
span, :func:`monitor.ingest.qc.gross_range`) are rejected; a value already stored for its key is a duplicate. Forecasts
carry no QC flags.
"""

from __future__ import annotations

import numpy as np
from sqlalchemy import select
from sqlalchemy.engine import Connection

from monitor.ingest import qc
from monitor.ingest.dedupe import dedupe_batch
from monitor.ingest.parsing import Parsed
from monitor.ingest.qc_flags import FAIL
from monitor.ingest.tables import Rejection
from monitor.store.db import param_marker
from monitor.store.schema import driver_forecasts
from monitor.timeutil import datetime_from_ns, db_times, ns_from_datetime


def store_forecasts(conn: Connection, config, parsed: Parsed, source: str, batch_id: int,
                    rejections: list[Rejection]) -> tuple[int, int, int]:
    """Store a batch of weather forecasts; return (accepted, flagged = 0, duplicate).

    source: the feed's source name, part of each value's identity;
    rejections: the batch's rejections so far, extended in place.
    """
    frame, duplicate = dedupe_batch(parsed, rejections, ["station", "variable", "issued", "t"])
    if frame.empty:
        return 0, 0, duplicate
    keep = np.ones(len(frame), dtype=bool)
    values = frame["value"].to_numpy()
    censored = frame["censored"].to_numpy(dtype=bool)
    for i in np.nonzero(censored)[0]:
        keep[i] = False
        rejections.append(Rejection(int(frame.at[i, "line"]), parsed.raw_text(frame.at[i, "line"]),
                                    f"a forecast {frame.at[i, 'variable']} cannot be below a detection limit"))
    for i in np.nonzero(np.isnan(values) & ~censored)[0]:
        keep[i] = False
        rejections.append(Rejection(int(frame.at[i, "line"]), parsed.raw_text(frame.at[i, "line"]),
                                    f"missing {frame.at[i, 'variable']} value"))
    for variable, idx in frame.groupby("variable", sort=False).indices.items():
        s = qc.thresholds(variable, getattr(config, "qc", {}).get(variable))
        fl = qc.gross_range(values[idx], s.get("sensor_min"), s.get("sensor_max"))
        for i in idx[(fl == FAIL) & keep[idx]]:
            keep[i] = False
            rejections.append(Rejection(int(frame.at[i, "line"]), parsed.raw_text(frame.at[i, "line"]),
                                        f"{variable} {values[i]!r} is outside the sensor range "
                                        f"[{s.get('sensor_min')}, {s.get('sensor_max')}]"))
    existing = _stored_keys(conn, frame, source)
    out = []
    f = frame[keep]
    for st, var, iss, t, value in zip(f["station"], f["variable"], f["issued"], f["t"], f["value"]):
        if (st, var, int(iss), int(t)) in existing:
            duplicate += 1
            continue
        out.append((st, var, iss, t, value))
    if out:
        _insert(conn, out, source, batch_id)
    return len(out), 0, duplicate


def _stored_keys(conn: Connection, frame, source: str) -> set[tuple]:
    """(station, variable, issued [ns], valid [ns]) stored for the frame's stations and source in its issue times."""
    existing: set[tuple] = set()
    issued_unique = np.unique(frame["issued"].to_numpy())
    for station in frame["station"].unique():
        rows = conn.execute(select(driver_forecasts.c.variable, driver_forecasts.c.issued_utc,
                                   driver_forecasts.c.valid_utc, driver_forecasts.c.value).where(
            driver_forecasts.c.station_id == station, driver_forecasts.c.source == source,
            driver_forecasts.c.issued_utc >= datetime_from_ns(issued_unique.min()),
            driver_forecasts.c.issued_utc <= datetime_from_ns(issued_unique.max()))).fetchall()
        for var, iss, val, _value in rows:
            existing.add((station, var, ns_from_datetime(iss), ns_from_datetime(val)))
    return existing


def _insert(conn: Connection, out: list[tuple], source: str, batch_id: int) -> None:
    """Insert (station, variable, issued [ns], valid [ns], value) rows."""
    d = conn.dialect.name
    st, var, iss, t, value = zip(*out)
    ph = param_marker(conn)
    conn.exec_driver_sql(
        f"INSERT INTO driver_forecasts (station_id, variable, issued_utc, valid_utc, value, source, batch_id) "
        f"VALUES ({ph}, {ph}, {ph}, {ph}, {ph}, {ph}, {ph})",
        list(zip(st, var, db_times(np.array(iss), d), db_times(np.array(t), d), [float(x) for x in value],
                 [source] * len(out), [batch_id] * len(out))))
