"""Typed reading of TOML tables that names the file and the dotted key on every error.

A :class:`Reader` wraps one table; each value is read with the type it must
have, and :meth:`Reader.finish` refuses any key that was not read, so a
misspelt option is an error at load time rather than silently ignored.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

from monitor.config.errors import ConfigError

_MISSING = object()


class Reader:
    """Typed access to a TOML table that reports the file and dotted key on error."""

    def __init__(self, path: Path | None, table: Mapping[str, Any], prefix: str = ""):
        self.path = path
        self.table = table
        self.prefix = prefix
        if not isinstance(table, Mapping):
            raise ConfigError(path, prefix or "<top>", f"expected a table, got {type(table).__name__}")
        self.used: set[str] = set()

    def key(self, name: str) -> str:
        """The dotted key of ``name`` in this table."""
        return f"{self.prefix}.{name}" if self.prefix else name

    def error(self, name: str, message: str) -> ConfigError:
        return ConfigError(self.path, self.key(name), message)

    def get(self, name: str, kind: type | tuple[type, ...], default: Any = _MISSING) -> Any:
        """The value of ``name``, of type ``kind`` (an integer is accepted for a float)."""
        self.used.add(name)
        if name not in self.table:
            if default is _MISSING:
                raise self.error(name, f"is required ({kind_name(kind)})")
            return default
        value = self.table[name]
        kinds = kind if isinstance(kind, tuple) else (kind,)
        if float in kinds and isinstance(value, int) and not isinstance(value, bool):
            value = float(value)
        if isinstance(value, bool) and bool not in kinds:
            raise self.error(name, f"expected {kind_name(kind)}, got a boolean")
        if not isinstance(value, kinds):
            raise self.error(name, f"expected {kind_name(kind)}, got {value!r}")
        return value

    def positive(self, name: str, default: Any = _MISSING) -> float:
        value = self.get(name, float, default)
        if value is not None and not value > 0:
            raise self.error(name, f"expected a positive number, got {value!r}")
        return value

    def choice(self, name: str, choices: tuple[str, ...], default: Any = _MISSING) -> str:
        value = self.get(name, str, default)
        if value not in choices:
            raise self.error(name, f"expected one of {', '.join(choices)}; got {value!r}")
        return value

    def sub(self, name: str, required: bool = False) -> Reader:
        """The sub-table ``name`` (empty when absent and not required)."""
        value = self.get(name, dict, _MISSING if required else {})
        return Reader(self.path, value, self.key(name))

    def items(self, name: str, required: bool = False) -> list[Reader]:
        """The array of tables ``name``, one reader per element."""
        value = self.get(name, list, _MISSING if required else [])
        out = []
        for i, item in enumerate(value):
            key = f"{self.key(name)}[{i}]"
            if not isinstance(item, Mapping):
                raise ConfigError(self.path, key, "expected a table")
            out.append(Reader(self.path, item, key))
        return out

    def finish(self) -> None:
        """Refuse the first key of this table that nothing read."""
        unknown = sorted(set(self.table) - self.used)
        if unknown:
            raise self.error(unknown[0], "unknown key (check the spelling; see README.md for the keys)")


def kind_name(kind: type | tuple[type, ...]) -> str:
    """``(int, float)`` → ``"an integer or a number"``: how a message names a type."""
    names = {str: "a string", float: "a number", int: "an integer", bool: "true or false",
             dict: "a table", list: "an array"}
    kinds = kind if isinstance(kind, tuple) else (kind,)
    return " or ".join(names.get(k, k.__name__) for k in kinds)


def timezone(r: Reader, name: str, default: str) -> str:
    """An IANA time-zone name, checked against the zone database."""
    tz = r.get(name, str, default)
    try:
        ZoneInfo(tz)
    except (ZoneInfoNotFoundError, ValueError):
        raise r.error(name, f"unknown time zone {tz!r} (expected an IANA name such as 'UTC' or 'Etc/GMT-2')") from None
    return tz


def secret(r: Reader, name: str) -> str | None:
    """A secret given inline as NAME or by environment variable as NAME_env."""
    value = r.get(name, str, None)
    env = r.get(f"{name}_env", str, None)
    if env is not None:
        if env not in os.environ:
            raise r.error(f"{name}_env", f"environment variable {env} is not set")
        return os.environ[env]
    return value


def resolve(base: Path, value: str) -> Path:
    """A path from the file, relative to the config file's folder ``base``."""
    p = Path(value).expanduser()
    return p if p.is_absolute() else (base / p)


def database_url(base: Path, url: str) -> str:
    """Make a relative SQLite path absolute against the config file's folder."""
    prefix = "sqlite:///"
    if url.startswith(prefix) and not url.startswith(prefix + "/") and url != "sqlite:///:memory:":
        return prefix + str((base / url[len(prefix):]).resolve())
    return url
