"""The model spec and filter settings of a configured water body, built and checked in one place.

The cycle builds a water body's :class:`assimilation.spec.ModelSpec` and
:class:`FilterConfig` with :func:`model_spec` and :func:`filter_config`;
loading a configuration builds them with the same functions
(:func:`check_model_spec`, :func:`check_filter_config`), so anything the
numerics would refuse is refused at load with the file, the dotted key and
the numerics' own statement of what was expected. The ranges live in
``assimilation`` alone.
"""

from __future__ import annotations

import dataclasses
import typing
from pathlib import Path
from types import NoneType
from typing import Any

from assimilation.filter_config import FilterConfig
from assimilation.parameters import default_spec
from assimilation.spec import Basin, ModelSpec, Network
from monitor.config.errors import ConfigError
from monitor.config.models import BasinConfig, Config, WaterBodyConfig

#: FilterConfig fields that ``[filter]`` sets under its own key names.
SETTINGS_FIELDS = {"members": "members", "method": "method", "window_d": "window_days"}
#: FilterConfig fields that come from the rest of the configuration.
DERIVED_FIELDS = ("n_sensors",)


# --------------------------------------------------------------------------
# Builders (used by the cycle)


def _basin(b: BasinConfig) -> Basin:
    return Basin(name=b.id, volume_m3=b.volume_m3, mean_depth_m=b.mean_depth_m, area_m2=b.area_m2)


def _network(wb: WaterBodyConfig) -> Network:
    ids = [b.id for b in wb.basins]
    return Network(downstream=tuple(-1 if b.flows_to == "outlet" else ids.index(b.flows_to) for b in wb.basins),
                   inflow_basin=tuple(ids.index(i.basin) for i in wb.inflows))


def model_spec(wb: WaterBodyConfig) -> ModelSpec:
    """The model spec of a configured water body (default parameters plus its overrides)."""
    spec = default_spec([_basin(b) for b in wb.basins], _network(wb))
    return dataclasses.replace(spec, **dict(wb.model)) if wb.model else spec


def chlorophyll_sensors(config: Config, wb: WaterBodyConfig) -> tuple[str, ...]:
    """The stations of a water body whose chlorophyll-fluorescence gain the filter estimates (file order)."""
    return tuple(s.id for s in config.stations_of(wb.id, variable="chlorophyll_fluorescence"))


def filter_config(config: Config, wb: WaterBodyConfig) -> FilterConfig:
    """The filter settings of a water body: ``[filter]`` plus one estimated gain per chlorophyll sensor."""
    return FilterConfig(members=config.filter.members, method=config.filter.method,
                                    n_sensors=len(chlorophyll_sensors(config, wb)),
                                    window_d=config.filter.window_days, **dict(config.filter.options))


def filter_option_kinds() -> dict[str, tuple[type, ...]]:
    """The options ``[filter]`` may pass to FilterConfig, each with the TOML types it accepts."""
    hints = typing.get_type_hints(FilterConfig)
    out = {}
    for f in dataclasses.fields(FilterConfig):
        if f.init and f.name not in SETTINGS_FIELDS and f.name not in DERIVED_FIELDS:
            hint = hints[f.name]
            out[f.name] = tuple(k for k in (typing.get_args(hint) or (hint,)) if k is not NoneType)
    return out


# --------------------------------------------------------------------------
# Checks at load


def check_model_spec(wb: WaterBodyConfig, path: Path | None, prefix: str) -> None:
    """Build ``wb``'s model spec as the cycle will; a refusal becomes a :class:`ConfigError`.

    prefix: the water body's dotted key (``water_bodies[0]``). Basins, the
    flow network and each model override are built on their own first, so
    the error names the key at fault.
    """
    for i, b in enumerate(wb.basins):
        try:
            _basin(b)
        except ValueError as exc:
            raise ConfigError(path, f"{prefix}.basins[{i}]", str(exc)) from None
    try:
        network = _network(wb)
    except ValueError as exc:
        # basin and inflow references are checked while reading, so what the
        # network refuses here is a loop (a basin flowing back into itself)
        raise ConfigError(path, f"{prefix}.basins",
                          f"the flow network has a loop ({exc}; basins count from 0 in the order listed)") from None
    base = _try(path, prefix, default_spec, [_basin(b) for b in wb.basins], network)
    for key, value in wb.model.items():
        _try(path, f"{prefix}.model.{key}", dataclasses.replace, base, **{key: value})
    _try(path, f"{prefix}.model", model_spec, wb)


def check_filter_config(config: Config, path: Path | None) -> None:
    """Build every water body's FilterConfig as the cycle will; a refusal becomes a :class:`ConfigError`.

    Each ``[filter]`` value is tried on its own first, so the error names
    the key at fault (``filter.inflation``).
    """
    settings = config.filter
    given = {field: getattr(settings, key) for field, key in SETTINGS_FIELDS.items()}
    keys = {field: f"filter.{key}" for field, key in SETTINGS_FIELDS.items()}
    given.update(settings.options)
    keys.update({name: f"filter.{name}" for name in settings.options})
    for field, value in given.items():
        _try(path, keys[field], FilterConfig, **{field: value})
    for wb in config.water_bodies:
        _try(path, "filter", filter_config, config, wb)


def _try(path: Path | None, key: str, build: typing.Callable[..., Any], *args: Any, **kwargs: Any) -> Any:
    """``build(*args, **kwargs)``, with a ValueError turned into a ConfigError at ``key``."""
    try:
        return build(*args, **kwargs)
    except ValueError as exc:
        raise ConfigError(path, key, str(exc)) from None
