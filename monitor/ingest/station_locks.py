"""The stations a batch's QC reads and writes, and the per-station lock that serialises concurrent batches.

A fluorometer's drift check (:mod:`monitor.ingest.qc_drift`) reads the
extracted chlorophyll-a of its own station and of the lab stations in its
basin, so new lab chlorophyll-a re-qualifies those fluorometers.

On PostgreSQL two batches of one station in concurrent transactions would
each qualify their readings without seeing the other's (READ COMMITTED),
and flags at the batches' edges would come out wrong. A batch therefore
takes ``pg_advisory_xact_lock`` for every station it writes before it reads
any stored neighbour; the locks are held to the end of its transaction and
taken in key order, so no two batches wait for each other in a cycle.
After the wait each statement sees the other batch's committed readings.
SQLite lets one writer in at a time and needs no lock.
"""

from __future__ import annotations

import hashlib
from collections.abc import Iterable

from sqlalchemy.engine import Connection

from monitor.store.db import param_marker


def lab_stations(config, station_id: str) -> list[str]:
    """Stations whose extracted chlorophyll-a checks this station's fluorometer: itself and lab stations in its basin."""
    out = [station_id]
    me = next((s for s in getattr(config, "stations", ()) if s.id == station_id), None)
    if me is not None and me.basin is not None:
        out += [s.id for s in config.stations if s.id != station_id and s.kind == "lab"
                and s.water_body == me.water_body and s.basin == me.basin]
    return out


def fluorometer_stations(config, lab_station_id: str) -> list[str]:
    """Stations whose fluorometers a lab station's chlorophyll-a checks (the inverse of :func:`lab_stations`)."""
    return [s.id for s in getattr(config, "stations", ()) if lab_station_id in lab_stations(config, s.id)]


def station_lock_key(station: str) -> int:
    """A stable signed 64-bit key for the advisory lock of a station's readings."""
    digest = hashlib.sha256(f"bloomline.readings:{station}".encode()).digest()
    return int.from_bytes(digest[:8], "big", signed=True)


def lock_stations(conn: Connection, config, stations: Iterable[str]) -> None:
    """PostgreSQL: wait for, and hold to the end of the transaction, the advisory lock of each station a
    batch writes and of each fluorometer its lab chlorophyll-a re-qualifies, in key order."""
    names = set(stations)
    for station in list(names):
        names.update(fluorometer_stations(config, station))
    for key in sorted({station_lock_key(s) for s in names}):
        conn.exec_driver_sql(f"SELECT pg_advisory_xact_lock({param_marker(conn)})", (key,))
