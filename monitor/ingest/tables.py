"""Payload bytes → text → records (CSV lines or JSON objects), every record accounted for.

A payload is decoded (a BOM decides UTF-8/16/32; otherwise UTF-8, and
Latin-1 when the bytes are not valid UTF-8) and split into a
:class:`Table`: the header, then each data record's fields, its line number
(the JSON object's position for JSON) and raw text. A record that cannot be
read becomes a :class:`Rejection` with its line, raw text and reason.
"""

from __future__ import annotations

import codecs
import csv
import io
import json
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

MAX_RAW_CHARS = 4000  # rejected rows keep at most this much of their raw text (the payload is archived whole)


@dataclass
class Rejection:
    """A record (or reading) refused: its line (the JSON object's position), raw text and why."""

    line: int | None
    raw: str
    reason: str


def clean_text(s: str) -> str:
    """Text safe for any database column: NUL and lone surrogates escaped, length bounded."""
    if "\x00" in s:
        s = s.replace("\x00", "\\x00")
    s = s.encode("utf-8", "backslashreplace").decode("utf-8")
    if len(s) > MAX_RAW_CHARS:
        s = s[:MAX_RAW_CHARS] + f"… ({len(s)} characters in all)"
    return s


def decode(payload: bytes) -> tuple[str, str]:
    """(text, encoding): a BOM wins; else UTF-8; else Latin-1 (never fails)."""
    for bom, enc in ((codecs.BOM_UTF32_LE, "utf-32"), (codecs.BOM_UTF32_BE, "utf-32"),
                     (codecs.BOM_UTF8, "utf-8-sig"), (codecs.BOM_UTF16_LE, "utf-16"),
                     (codecs.BOM_UTF16_BE, "utf-16")):
        if payload.startswith(bom):
            try:
                return payload.decode(enc), enc
            except UnicodeDecodeError:
                break
    try:
        return payload.decode("utf-8"), "utf-8"
    except UnicodeDecodeError:
        return payload.decode("latin-1"), "latin-1"


# --------------------------------------------------------------------------
# Records


@dataclass
class Table:
    """A payload's header and data records: fields, line numbers and raw text of each record."""

    header: list[str]
    rows: list[list[str]]
    lines: list[int]
    raws: list[str]


def _plain_table(text: str, record_lines: list[int]) -> Table | None:
    """The common case of :func:`csv_table`: no quotes, no CR, no NUL, no over-long line.

    Then a CSV record is one physical line split at commas, exactly as the
    csv module would read it, only faster.
    """
    lines = text.split("\n")
    if lines and lines[-1] == "":
        lines.pop()
    fields = [line.split(",") for line in lines]
    keep = [i for i, f in enumerate(fields) if len(f) > 1 or f[0].strip()]
    if not keep:
        return None
    header = [f.strip() for f in fields[keep[0]]]
    if header and header[0].startswith("\ufeff"):
        header[0] = header[0][1:]
    body = keep[1:]
    row_lines = [i + 1 for i in body]
    record_lines.extend(row_lines)
    return Table(header, [fields[i] for i in body], row_lines, [lines[i] for i in body])


def csv_table(text: str, rejected: list[Rejection], record_lines: list[int], fast: bool = True) -> Table | None:
    """CSV text → its table (None without a header line); unreadable records go to ``rejected``.

    Every data record's line number is appended to ``record_lines``;
    ``fast=False`` always takes the csv module's path.
    """
    if fast and '"' not in text and "\r" not in text and "\x00" not in text and \
            max(map(len, text.split("\n")), default=0) < csv.field_size_limit():
        return _plain_table(text, record_lines)
    # split on \n, \r and \r\n only (str.splitlines would also split on \x85, \u2028, form feeds…)
    lines = list(io.StringIO(text, newline=""))
    reader = csv.reader(iter(lines))
    header: list[str] | None = None
    rows, row_lines, raws = [], [], []
    prev = 0
    while True:
        try:
            fields = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            start = prev + 1
            raw = "".join(lines[prev:reader.line_num])
            prev = reader.line_num
            record_lines.append(start)
            rejected.append(Rejection(start, clean_text(raw), f"unreadable CSV record: {exc}"))
            continue
        start = prev + 1
        raw_lines = lines[prev:reader.line_num]
        prev = reader.line_num
        if not fields or (len(fields) == 1 and not fields[0].strip()):
            continue  # a blank line is not a record (",,," is: an empty record, rejected below)
        if header is None:
            header = [f.strip() for f in fields]
            if header and header[0].startswith("\ufeff"):
                header[0] = header[0][1:]
            continue
        record_lines.append(start)
        rows.append(fields)
        row_lines.append(start)
        raws.append("".join(raw_lines).rstrip("\r\n"))
    if header is None:
        return None
    return Table(header, rows, row_lines, raws)


def _scalar(value: Any) -> str | None:
    if value is None:
        return ""
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        return repr(value) if not isinstance(value, float) or np.isfinite(value) else str(value)
    if isinstance(value, str):
        return value
    return None


def json_table(text: str, rejected: list[Rejection], record_lines: list[int]) -> Table | None:
    """JSON text (an object, a list of objects, or ``{"readings": [...]}``) → a table with the union of keys.

    Records that are not objects, or hold a field that is not a string,
    number or null, go to ``rejected``; every record's position is appended
    to ``record_lines``.
    """
    try:
        doc = json.loads(text)
    except (ValueError, RecursionError) as exc:
        record_lines.append(1)
        rejected.append(Rejection(1, clean_text(text), f"not valid JSON: {exc}"))
        return None
    if isinstance(doc, Mapping) and isinstance(doc.get("readings"), list):
        records = doc["readings"]
    elif isinstance(doc, list):
        records = doc
    elif isinstance(doc, Mapping):
        records = [doc]
    else:
        record_lines.append(1)
        rejected.append(Rejection(1, clean_text(text), "expected a JSON object, a list of objects, "
                                                       "or {\"readings\": [...]}"))
        return None
    header: list[str] = []
    seen: set[str] = set()
    rows, lines, raws = [], [], []
    for i, rec in enumerate(records, start=1):
        record_lines.append(i)
        try:
            raw = json.dumps(rec, ensure_ascii=False)
        except (ValueError, RecursionError):
            raw = repr(rec)
        if not isinstance(rec, Mapping):
            rejected.append(Rejection(i, clean_text(raw), "record is not a JSON object"))
            continue
        row = {}
        bad = None
        for k, v in rec.items():
            s = _scalar(v)
            if s is None:
                bad = k
                break
            row[str(k).strip()] = s
        if bad is not None:
            rejected.append(Rejection(i, clean_text(raw), f"field {bad!r} is not a string, number or null"))
            continue
        for k in row:
            if k not in seen:
                seen.add(k)
                header.append(k)
        rows.append(row)
        lines.append(i)
        raws.append(raw)
    index = {k: j for j, k in enumerate(header)}
    table_rows = []
    for row in rows:
        out = [""] * len(header)
        for k, v in row.items():
            out[index[k]] = v
        table_rows.append(out)
    return Table(header, table_rows, lines, raws)
