"""Structured logs: one JSON object per line on stderr.

Every record carries time (ISO 8601 UTC), level, logger and message, and
the fields given in ``extra`` (``event``, ``job``, ``water_body``,
``outcome``, ``duration_s``, ``counts`` …), so a log collector can filter
by job and water body. APScheduler's own chatter is kept to warnings; the
service logs its jobs itself.
"""

from __future__ import annotations

import datetime as dt
import json
import logging
import sys

_STANDARD = set(logging.LogRecord("", 0, "", 0, "", (), None).__dict__) | {"message", "asctime", "taskName"}


class JsonFormatter(logging.Formatter):
    """A log record as one line of JSON."""

    def format(self, record: logging.LogRecord) -> str:
        out = {"time": dt.datetime.fromtimestamp(record.created, dt.UTC).isoformat(timespec="milliseconds"),
               "level": record.levelname.lower(), "logger": record.name, "message": record.getMessage()}
        for key, value in record.__dict__.items():
            if key not in _STANDARD and not key.startswith("_"):
                out[key] = value
        if record.exc_info:
            out["traceback"] = self.formatException(record.exc_info)
        return json.dumps(out, default=str, ensure_ascii=False)


def setup_logging(*, json_lines: bool = True, level: int = logging.INFO) -> None:
    """Log to stderr, as JSON lines (default) or plain text; quiet APScheduler below warnings."""
    handler = logging.StreamHandler(sys.stderr)
    handler.setFormatter(JsonFormatter() if json_lines else
                         logging.Formatter("%(asctime)s %(levelname)s %(name)s %(message)s"))
    root = logging.getLogger()
    for old in list(root.handlers):
        root.removeHandler(old)
    root.addHandler(handler)
    root.setLevel(level)
    logging.getLogger("apscheduler").setLevel(logging.WARNING)
