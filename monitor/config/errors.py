"""The one exception of the configuration: which file, which key, what was expected."""

from __future__ import annotations

import os


class ConfigError(ValueError):
    """A configuration problem: which file, which key, what was expected."""

    def __init__(self, path: str | os.PathLike | None, key: str, message: str):
        self.path = str(path) if path is not None else "<config>"
        self.key = key
        self.message = message
        super().__init__(f"{self.path}: {key}: {message}")
