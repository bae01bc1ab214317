"""The CSV drop folder: each new file ingested once, then (``archive = true``) moved to the archive.

A file is new when the SHA-256 of its bytes has no stored batch of the
feed yet (one that did not fail), so a file renamed or dropped again is not
loaded twice, and a file whose batch failed is tried again on the next
poll. The raw payload is always archived by hash
(:func:`monitor.ingest.archive.archive_payload`); with ``archive = true``
the file also leaves the drop folder for
``<archive_dir>/<feed>/processed/`` once its batch is stored.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import shutil
from collections.abc import Callable
from pathlib import Path

from sqlalchemy import select
from sqlalchemy.engine import Engine

from monitor.ingest.archive import safe_name
from monitor.ingest.batches import BatchResult, ingest_bytes
from monitor.store.schema import ingest_batches

Progress = Callable[[int, int, BatchResult], None]  # (files done, files in all, the last file's result)


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
    target = Path(config.service.archive_dir) / safe_name(feed.name) / "processed" / rel
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


def poll_folder(engine, config, feed, *, progress=None, now: dt.datetime | None = None) -> list[BatchResult]:
    """Ingest the new files of one csv-folder feed; the scheduler calls this every few minutes."""
    return ingest_feed(engine, config, feed, progress=progress, now=now)
