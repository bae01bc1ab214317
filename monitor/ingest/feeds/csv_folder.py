"""The CSV drop folder: each new file ingested once, then (``archive = true``) moved to the archive.

A file is new when the SHA-256 of its bytes has no stored batch of the
feed yet, so a file renamed or dropped again is not loaded twice, and a
file whose batch failed is tried again on the next poll. The raw payload is
always archived by hash (:func:`monitor.ingest.batches.archive_payload`); with
``archive = true`` the file also leaves the drop folder for
``<archive_dir>/<feed>/processed/`` once its batch is stored.
"""

from __future__ import annotations

import datetime as dt

from monitor.ingest.batches import BatchResult, ingest_feed


def poll_folder(engine, config, feed, *, progress=None, now: dt.datetime | None = None) -> list[BatchResult]:
    """Ingest the new files of one csv-folder feed; the scheduler calls this every few minutes."""
    return ingest_feed(engine, config, feed, progress=progress, now=now)
