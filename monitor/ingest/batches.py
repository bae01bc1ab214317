"""One ingest batch: parse → convert → QC → store, atomically, losing nothing.

* The raw payload is archived (:mod:`monitor.ingest.archive`) before
  anything is stored, and the batch row keeps its SHA-256 and archive path.
* Everything a batch writes (its batch row, readings or weather forecasts,
  rejected rows, the re-evaluated QC flags of stored neighbours) is one
  database transaction: a batch is stored whole or not at all.
* Idempotent: the same reading again is counted as a duplicate and stored
  once; a different value for a stored reading is rejected
  (:mod:`monitor.ingest.qc_storage`, :mod:`monitor.ingest.weather_forecasts`).
* Counts: ``received == accepted + rejected + duplicate``; ``flagged`` is
  the number of accepted readings with QC flag 3 or 4.

Files and drop folders: :mod:`monitor.ingest.feeds.csv_folder`.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import re
from collections import Counter
from dataclasses import dataclass

from sqlalchemy import insert, update
from sqlalchemy.engine import Connection, Engine

from monitor.ingest.archive import archive_payload, payload_suffix
from monitor.ingest.parsing import Parsed, parse_payload
from monitor.ingest.qc_storage import store_readings
from monitor.ingest.tables import Rejection, clean_text
from monitor.ingest.weather_forecasts import store_forecasts
from monitor.store.schema import ingest_batches, rejected_rows
from monitor.timeutil import now_utc


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
        archive = archive_payload(config.service.archive_dir, feed.name, payload, sha,
                                  payload_suffix(feed, origin))
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
        accepted, flagged, duplicate = store_forecasts(conn, config, parsed, source, batch_id, rejections)
    else:
        accepted, flagged, duplicate = store_readings(conn, config, parsed, source, batch_id, rejections)
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
