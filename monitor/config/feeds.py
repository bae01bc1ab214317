"""``[[feeds]]``: where readings come from (folder, HTTP, push, MQTT) and how their payloads are laid out.

Besides where and how, a feed says how to read its values: variable names
(for every station, and per station), unit strings mapped to known units,
how values below detection are written, and which numbers are fill values
(sentinels). Everything is checked here, at load, against the canonical
variables and the stations' stored-only variables.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from pathlib import Path

from monitor.config.models import (
    BELOW_DETECTION,
    BELOW_DETECTION_LEGACY,
    DEFAULT_SENTINEL_MAGNITUDE,
    DEFAULT_SENTINELS,
    FEED_KINDS,
    FEED_ROLES,
    LAYOUTS,
    ColumnConfig,
    FeedConfig,
    StationConfig,
)
from monitor.config.reader import Reader, resolve, secret, timezone
from monitor.ingest.units import known_unit
from monitor.ingest.variables import VARIABLES


def read_feed(r: Reader, base: Path, stations: Sequence[StationConfig] = ()) -> FeedConfig:
    """One ``[[feeds]]`` table → :class:`FeedConfig`; relative paths are taken against ``base``.

    stations: the config's stations, whose stored-only variables a feed may
    name and whose ids ``station_variable_names`` is keyed by.
    """
    name = r.get("name", str)
    kind = r.choice("kind", FEED_KINDS)
    own = {st.id: frozenset(st.stored_only) for st in stations}
    anyone = frozenset().union(*own.values()) if own else frozenset()
    columns = _columns(r, anyone)
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
        columns=columns, below_detection=_below_detection(r),
        variable_names=_variable_names(r, anyone), station_variable_names=_station_variable_names(r, own),
        units=_units(r), negative_means_below_detection=r.get("negative_means_below_detection", bool, False),
        detection_limits=_detection_limits(r), sentinels=_sentinels(r),
        sentinel_magnitude=_finite_positive(r, "sentinel_magnitude", DEFAULT_SENTINEL_MAGNITUDE))
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
    if fd.station_variable_names and fd.layout != "long":
        raise r.error("station_variable_names", "needs the long layout (a wide layout names its variables "
                                                "in [columns])")
    r.finish()
    return fd


def _expected(own: frozenset[str]) -> str:
    extra = f", or a station's stored_only variable ({', '.join(sorted(own))})" if own else ""
    return f"expected one of {', '.join(VARIABLES)}{extra}"


def _columns(r: Reader, own: frozenset[str]) -> dict[str, ColumnConfig]:
    """Wide layout: ``columns.<column> = {variable, unit}``."""
    columns = {}
    cr = r.sub("columns")
    for col in list(cr.table):
        c = cr.sub(col)
        variable = c.get("variable", str)
        if variable not in VARIABLES and variable not in own:
            raise c.error("variable", f"unknown variable {variable!r}; {_expected(own)}")
        columns[col] = ColumnConfig(variable=variable, unit=c.get("unit", str))
        c.finish()
    cr.finish()
    return columns


def _names(table: Reader, own: frozenset[str]) -> dict[str, str]:
    """``<the feed's name> = "<variable>"`` for every key of ``table``."""
    out = {}
    for name in list(table.table):
        target = table.get(name, str)
        if target not in VARIABLES and target not in own:
            raise table.error(name, f"{_expected(own)}; got {target!r}")
        out[name] = target
    table.finish()
    return out


def _variable_names(r: Reader, own: frozenset[str]) -> dict[str, str]:
    """Long layout: the feed's own variable names → canonical (or stored-only) names, for every station."""
    return _names(r.sub("variable_names"), own)


def _station_variable_names(r: Reader, own: dict[str, frozenset[str]]) -> dict[str, dict[str, str]]:
    """``[feeds.station_variable_names.<station>]``: the feed's names → variables at one station.

    They come before ``variable_names``, so one file can say ``chlorophyll_a``
    for the fluorometer at a buoy and for the extracted sample at a lab site.
    """
    table = r.sub("station_variable_names")
    out = {}
    for station in list(table.table):
        if station not in own:
            raise table.error(station, f"no station {station!r} in [[stations]]")
        out[station] = _names(table.sub(station), own[station])
    table.finish()
    return out


def _below_detection(r: Reader) -> str:
    """``below_detection``: "censored" (default) or "reject"; older configs' "half"/"zero" read as "censored"."""
    value = r.choice("below_detection", BELOW_DETECTION + BELOW_DETECTION_LEGACY, "censored")
    return "censored" if value in BELOW_DETECTION_LEGACY else value


def _units(r: Reader) -> dict[str, str]:
    """``units = { "<unit as sent>" = "<known unit>" }``: unit strings this feed writes its own way."""
    table = r.sub("units")
    out = {}
    for sent in list(table.table):
        target = table.get(sent, str)
        if not sent.strip():
            raise table.error(sent, "expected a unit string as the feed writes it, got an empty key")
        if not known_unit(target):
            raise table.error(sent, f"{target!r} is not a unit Bloomline knows; map to one such as "
                                    "ug/L, ug/L N, mg/L P, mg/L, degC, m, m3/s, W/m2, m/s, NTU, uS/cm, %")
        out[sent] = target
    table.finish()
    return out


def _detection_limits(r: Reader) -> dict[str, float]:
    """``detection_limits = { nitrate = 2.0 }`` [the variable's canonical unit], for negative values
    read as below detection."""
    table = r.sub("detection_limits")
    out = {}
    for variable in list(table.table):
        v = VARIABLES.get(variable)
        if v is None or not v.detection_limited:
            limited = [k for k, x in VARIABLES.items() if x.detection_limited]
            raise table.error(variable, f"expected a lab analyte ({', '.join(limited)})")
        out[variable] = _finite_positive(table, variable)
    table.finish()
    return out


def _sentinels(r: Reader) -> tuple[float, ...]:
    """``sentinels = [-9999, -999]``: numbers (as written, before any conversion) that mean "no value"."""
    values = r.get("sentinels", list, list(DEFAULT_SENTINELS))
    for v in values:
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            raise r.error("sentinels", f"expected finite numbers, got {v!r}")
    return tuple(float(v) for v in values)


def _finite_positive(r: Reader, name: str, default=None) -> float:
    value = r.get(name, float) if default is None else r.get(name, float, default)
    if not (math.isfinite(value) and value > 0):
        raise r.error(name, f"expected a finite positive number, got {value!r}")
    return value
