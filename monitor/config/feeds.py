"""``[[feeds]]``: where readings come from (folder, HTTP, push, MQTT) and how their payloads are laid out."""

from __future__ import annotations

from pathlib import Path

from monitor.config.models import BELOW_DETECTION, FEED_KINDS, FEED_ROLES, LAYOUTS, ColumnConfig, FeedConfig
from monitor.config.reader import Reader, resolve, secret, timezone
from monitor.ingest.variables import VARIABLES


def read_feed(r: Reader, base: Path) -> FeedConfig:
    """One ``[[feeds]]`` table → :class:`FeedConfig`; relative paths are taken against ``base``."""
    name = r.get("name", str)
    kind = r.choice("kind", FEED_KINDS)
    columns = _columns(r)
    path = r.get("path", str, None)
    fd = FeedConfig(
        name=name, kind=kind, role=r.choice("role", FEED_ROLES, "readings"),
        source=r.get("source", str, name),
        path=resolve(base, path) if path else None, pattern=r.get("pattern", str, "*.csv"),
        archive=r.get("archive", bool, False),
        url=r.get("url", str, None), every_minutes=r.positive("every_minutes", 15.0),
        timeout_s=r.positive("timeout_s", 10.0), host=r.get("host", str, "127.0.0.1"),
        port=r.get("port", int, 1883), topic=r.get("topic", str, None),
        token=secret(r, "token"),
        format=r.choice("format", ("csv", "json"), "csv"), layout=r.choice("layout", LAYOUTS, "long"),
        time_column=r.get("time_column", str, "time"), time_format=r.get("time_format", str, "iso"),
        timezone=timezone(r, "timezone", "UTC"), issued_column=r.get("issued_column", str, None),
        station=r.get("station", str, None), station_column=r.get("station_column", str, None),
        station_from_folder=r.get("station_from_folder", bool, False),
        variable_column=r.get("variable_column", str, "variable"),
        value_column=r.get("value_column", str, "value"), unit_column=r.get("unit_column", str, "unit"),
        columns=columns, below_detection=r.choice("below_detection", BELOW_DETECTION, "reject"),
        variable_names=_variable_names(r))
    if kind == "csv-folder" and fd.path is None:
        raise r.error("path", "a csv-folder feed needs the folder it watches")
    if kind == "http-pull" and not fd.url:
        raise r.error("url", "an http-pull feed needs a url")
    if kind == "mqtt" and not fd.topic:
        raise r.error("topic", "an mqtt feed needs a topic")
    if kind == "push" and not fd.token:
        raise r.error("token", "a push feed needs a token (token = '…' or token_env = 'VARIABLE')")
    if fd.layout == "wide" and not columns:
        raise r.error("columns", "a wide layout needs a [columns] table mapping column → variable and unit")
    if fd.role == "weather-forecast" and not fd.issued_column:
        raise r.error("issued_column", "a weather-forecast feed needs the column with the issue time")
    r.finish()
    return fd


def _columns(r: Reader) -> dict[str, ColumnConfig]:
    """Wide layout: ``columns.<column> = {variable, unit}``."""
    columns = {}
    cr = r.sub("columns")
    for col in list(cr.table):
        c = cr.sub(col)
        variable = c.get("variable", str)
        if variable not in VARIABLES:
            raise c.error("variable", f"unknown variable {variable!r}")
        columns[col] = ColumnConfig(variable=variable, unit=c.get("unit", str))
        c.finish()
    cr.finish()
    return columns


def _variable_names(r: Reader) -> dict[str, str]:
    """Long layout: the feed's own variable names → canonical names."""
    table = r.sub("variable_names")
    out = {}
    for name in list(table.table):
        canonical = table.get(name, str)
        if canonical not in VARIABLES:
            raise table.error(name, f"expected one of {', '.join(VARIABLES)}; got {canonical!r}")
        out[name] = canonical
    table.finish()
    return out
