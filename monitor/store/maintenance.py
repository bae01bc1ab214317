"""Operations on a running store: pruning the archive of raw payloads, and an online SQLite backup.

Checkpoint pruning is :func:`monitor.store.runs.prune_checkpoints`, job-run
pruning :func:`monitor.store.jobs.prune_job_runs`; ``bloomline prune`` and
``bloomline backup`` drive these.
"""

from __future__ import annotations

import datetime as dt
import sqlite3
from pathlib import Path

from sqlalchemy import func, select
from sqlalchemy.engine import Engine

from monitor.store.schema import ingest_batches


def prune_archive(engine: Engine, archive_dir: Path, *, before: dt.datetime, dry_run: bool = False) -> dict:
    """Delete archived raw payloads whose every batch was received before ``before``; return counts.

    The batch rows stay (their SHA-256 still keeps a file from being loaded
    twice); only the copies of the raw bytes go. Files that drop folders
    moved to ``<archive>/<feed>/processed/`` go when last modified before
    ``before``. Nothing outside ``archive_dir`` is touched.
    """
    root = Path(archive_dir).resolve()
    with engine.connect() as conn:
        rows = conn.execute(select(ingest_batches.c.archive_path, func.max(ingest_batches.c.received_at))
                            .where(ingest_batches.c.archive_path.is_not(None))
                            .group_by(ingest_batches.c.archive_path)).all()
    candidates = [Path(p) for p, last in rows if last < before]
    cutoff = before.timestamp()
    if root.is_dir():
        candidates += [p for p in root.glob("*/processed/**/*") if p.is_file() and p.stat().st_mtime < cutoff]
    files = n_bytes = 0
    for path in candidates:
        path = path.resolve()
        if root not in path.parents or not path.is_file():
            continue
        files += 1
        n_bytes += path.stat().st_size
        if not dry_run:
            path.unlink()
    return {"files": files, "bytes": n_bytes, "dry_run": dry_run}


def sqlite_path(engine: Engine) -> Path:
    """The file of an SQLite store; ValueError for any other database."""
    if engine.dialect.name != "sqlite" or not engine.url.database or engine.url.database == ":memory:":
        raise ValueError("online backup copies SQLite files; back PostgreSQL up with pg_dump")
    return Path(engine.url.database)


def backup_sqlite(engine: Engine, dest: Path) -> int:
    """Copy the SQLite store to ``dest`` with SQLite's online backup API while the service runs; return bytes.

    The copy is one consistent snapshot (sqlite3 ``Connection.backup``),
    written to ``dest`` + ``.partial`` and renamed when complete.
    """
    source = sqlite_path(engine)
    dest = Path(dest)
    if dest.exists():
        raise FileExistsError(f"{dest} exists; choose a new file name")
    partial = dest.with_name(dest.name + ".partial")
    partial.unlink(missing_ok=True)
    src = sqlite3.connect(source, timeout=30)
    try:
        out = sqlite3.connect(partial)
        try:
            src.backup(out, pages=1024)
        finally:
            out.close()
    finally:
        src.close()
    partial.replace(dest)
    return dest.stat().st_size
