"""Reading a Bloomline TOML file into a :class:`Config`: every table, then the references between them.

:func:`load_config` refuses to return a half-valid configuration: each
table is read with its types and allowed keys, ids and references across
tables are checked, and the model spec and filter settings of every water
body are built as the cycle will build them.
"""

from __future__ import annotations

import os
import tomllib
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from monitor.config.errors import ConfigError
from monitor.config.feeds import read_feed
from monitor.config.model_setup import check_filter_config
from monitor.config.models import Config
from monitor.config.reader import Reader
from monitor.config.sections import (
    read_filter,
    read_observation_errors,
    read_schedule,
    read_service,
    read_smtp,
    read_subscriber,
    read_webhook,
)
from monitor.config.stations import qc_table, read_station
from monitor.config.water_bodies import read_water_body


def parse_config(data: Mapping[str, Any], path: Path | None = None) -> Config:
    """Validate a parsed TOML document into a :class:`Config`."""
    base = path.parent.resolve() if path is not None else Path.cwd()
    top = Reader(path, data)
    stations = tuple(read_station(st) for st in top.items("stations"))
    cfg = Config(
        path=path, service=read_service(top.sub("service"), base), schedule=read_schedule(top.sub("schedule")),
        smtp=read_smtp(top.sub("smtp"), base), filter=read_filter(top.sub("filter")),
        observation_errors=read_observation_errors(top.sub("observation_errors")),
        water_bodies=tuple(read_water_body(w) for w in top.items("water_bodies", required=True)),
        stations=stations, feeds=tuple(read_feed(f, base, stations) for f in top.items("feeds")),
        subscribers=tuple(read_subscriber(s) for s in top.items("subscribers")), qc=qc_table(top, "qc"),
        webhooks=tuple(read_webhook(w) for w in top.items("webhooks")))
    top.finish()
    _cross_check(cfg, path)
    check_filter_config(cfg, path)
    return cfg


def _cross_check(cfg: Config, path: Path | None) -> None:
    """References between sections: ids exist and are unique."""
    wb_ids = [w.id for w in cfg.water_bodies]
    if len(set(wb_ids)) != len(wb_ids):
        raise ConfigError(path, "water_bodies", f"water body ids must be unique, got {wb_ids}")
    st_ids = [s.id for s in cfg.stations]
    if len(set(st_ids)) != len(st_ids):
        raise ConfigError(path, "stations", f"station ids must be unique, got {st_ids}")
    for i, st in enumerate(cfg.stations):
        key = f"stations[{i}]"
        if st.water_body is not None:
            if st.water_body not in wb_ids:
                raise ConfigError(path, f"{key}.water_body", f"expected one of {', '.join(wb_ids)}")
            basins = [b.id for b in cfg.water_body(st.water_body).basins]
            if st.basin is not None and st.basin not in basins:
                raise ConfigError(path, f"{key}.basin", f"expected one of {', '.join(basins)}")
        if st.kind in ("buoy", "lab") and (st.water_body is None or st.basin is None):
            raise ConfigError(path, key, f"a {st.kind} station needs water_body and basin")
    for i, wb in enumerate(cfg.water_bodies):
        for j, inflow in enumerate(wb.inflows):
            if inflow.gauge not in st_ids:
                raise ConfigError(path, f"water_bodies[{i}].inflows[{j}].gauge",
                                  f"no station {inflow.gauge!r} in [[stations]]")
        if wb.weather_station is not None and wb.weather_station not in st_ids:
            raise ConfigError(path, f"water_bodies[{i}].weather_station",
                              f"no station {wb.weather_station!r} in [[stations]]")
    names = [f.name for f in cfg.feeds]
    if len(set(names)) != len(names):
        raise ConfigError(path, "feeds", f"feed names must be unique, got {names}")
    for i, fd in enumerate(cfg.feeds):
        if fd.station is not None and fd.station not in st_ids:
            raise ConfigError(path, f"feeds[{i}].station", f"no station {fd.station!r} in [[stations]]")
    for i, sub in enumerate(cfg.subscribers):
        for w in sub.water_bodies:
            if w not in wb_ids:
                raise ConfigError(path, f"subscribers[{i}].water_bodies", f"unknown water body {w!r}")
    hook_names = [h.name for h in cfg.webhooks]
    if len(set(hook_names)) != len(hook_names):
        raise ConfigError(path, "webhooks", f"webhook names must be unique, got {hook_names}")
    for i, hook in enumerate(cfg.webhooks):
        for w in hook.water_bodies:
            if w not in wb_ids:
                raise ConfigError(path, f"webhooks[{i}].water_bodies", f"unknown water body {w!r}")


def load_config(path: str | os.PathLike) -> Config:
    """Read and validate a Bloomline TOML file; raise :class:`ConfigError` if anything is wrong."""
    p = Path(path)
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise ConfigError(p, "<file>", f"cannot read the file: {exc.strerror or exc}") from None
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise ConfigError(p, "<file>", "expected UTF-8 text") from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(p, "<syntax>", f"not valid TOML: {exc}") from None
    return parse_config(data, p)
