"""The archive of raw payloads: every payload kept once, by its SHA-256, before anything is stored.

A payload of feed ``F`` with hash ``H`` lives at
``<archive_dir>/<F>/<H[:2]>/<H><suffix>``; it is written to a temporary
file, flushed to disk and renamed into place, so an archived file is
always whole.
"""

from __future__ import annotations

import os
import re
import tempfile
from pathlib import Path

ARCHIVE_SUFFIXES = (".csv", ".json", ".txt", ".tsv", ".dat")  # an origin with one of these keeps it


def archive_payload(archive_dir: Path, feed: str, payload: bytes, sha: str, suffix: str) -> Path:
    """Write ``payload`` once under its SHA-256 (atomic rename); return its path."""
    folder = Path(archive_dir) / safe_name(feed) / sha[:2]
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


def safe_name(name: str) -> str:
    """A feed name as a folder name: anything but letters, digits, ``_ . -`` becomes ``_``."""
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", name) or "feed"


def payload_suffix(feed, origin: str) -> str:
    """The archive file's suffix: the origin's own when it is a known data suffix, else by the feed's format."""
    suffix = Path(origin.split("?")[0]).suffix.lower()
    if suffix in ARCHIVE_SUFFIXES:
        return suffix
    return ".json" if feed.format == "json" else ".csv"
