"""What the push endpoint tells a sender about the rows it refused.

Each rejection is reported with its row (the line of a CSV body, the
position of a JSON record, counting from 1), the station named in the row,
the column at fault and the reason, for up to :data:`MAX_REPORTED`
rejections; the count of all of them is in the batch's counts. The column
is read from the reason the ingest gave (which names the column in a wide
table, or speaks of the time, station, variable, value or unit) and from
the feed's column names.
"""

from __future__ import annotations

import csv
import io
import json

from monitor.store.readings import rejected_rows_frame

#: Rejections described in one answer; the rest are counted only.
MAX_REPORTED = 100
#: Characters of a rejected row's raw text echoed back.
RAW_CHARS = 200


def _record(raw: str, header: list[str] | None, kind: str) -> dict:
    """The rejected row as {column: cell}, when it can be read back; else {}."""
    try:
        if kind == "json":
            obj = json.loads(raw)
            return obj if isinstance(obj, dict) else {}
        if header:
            (cells,) = list(csv.reader(io.StringIO(raw))) or [[]]
            return dict(zip(header, cells)) if len(cells) == len(header) else {}
    except (ValueError, csv.Error):
        return {}
    return {}


def _column(reason: str, feed) -> str | None:
    """The column a rejection's reason speaks of, in the feed's own column names."""
    if reason.startswith("column '"):
        return reason[len("column '"):].split("'", 1)[0]
    if reason.startswith("no column '"):
        return reason[len("no column '"):].split("'", 1)[0]
    words = reason.split(" ", 2)
    first = words[0] if words else ""
    if first == "time":
        return feed.time_column
    if reason.startswith("issue time"):
        return feed.issued_column
    if reason.startswith("unknown station") or reason == "no station":
        return feed.station_column
    if reason.startswith("unknown variable"):
        return feed.variable_column if feed.layout == "long" else None
    if first == "value":
        return feed.value_column if feed.layout == "long" else None
    if reason.startswith("unknown unit"):
        return feed.unit_column if feed.layout == "long" else None
    return None


def rejections(engine, feed, batch_id: int | None, body: bytes, kind: str) -> list[dict]:
    """Up to :data:`MAX_REPORTED` rejections of a batch: row, station, column, reason and raw text."""
    if batch_id is None:
        return []
    frame = rejected_rows_frame(engine, batch_id)
    header = None
    if kind == "csv":
        first = body.decode("utf-8-sig", "replace").splitlines()[:1]
        header = next(csv.reader(first), None) if first else None
    out = []
    for r in frame.head(MAX_REPORTED).itertuples(index=False):
        record = _record(r.raw, header, kind)
        station = record.get(feed.station_column) if feed.station_column else feed.station
        line = r.line
        out.append({"row": None if line is None or line != line else int(line),  # NaN != NaN: no line
                    "station": None if station is None else str(station),
                    "column": _column(r.reason, feed), "reason": r.reason, "raw": r.raw[:RAW_CHARS]})
    return out
