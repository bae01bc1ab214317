"""Rendered charts and answers kept in memory, keyed by what they show.

A chart is rendered once per key (kind, water body, basin, run, format,
size and the fingerprint of its data, :func:`monitor.store.status.chart_version`)
and then served from memory; pages and API answers likewise per URL and
store fingerprint (:mod:`web.answer_cache`). Requests for a key being
rendered wait for that one rendering instead of starting their own. A
cache holds at most ``max_bytes``; the least recently used items go first.
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from collections.abc import Callable, Hashable
from typing import Any

#: Memory the cache may use [bytes].
MAX_BYTES = 64 * 1024 * 1024


class ChartCache:
    """A thread-safe least-recently-used store of rendered items (bytes, or anything ``size`` can weigh)."""

    def __init__(self, max_bytes: int = MAX_BYTES, size: Callable[[Any], int] = len):
        if max_bytes < 1:
            raise ValueError(f"max_bytes must be positive, got {max_bytes}")
        self.max_bytes = max_bytes
        self._weigh = size
        self._items: OrderedDict[Hashable, Any] = OrderedDict()
        self._size = 0
        self._lock = threading.Lock()
        self._pending: dict[Hashable, threading.Lock] = {}
        self.renders = 0

    def __len__(self) -> int:
        return len(self._items)

    def get(self, key: Hashable) -> Any | None:
        """The item of ``key`` if it is held, else None (nothing is rendered)."""
        return self._get(key)

    def _get(self, key: Hashable) -> Any | None:
        with self._lock:
            body = self._items.get(key)
            if body is not None:
                self._items.move_to_end(key)
            return body

    def get_or_render(self, key: Hashable, render: Callable[[], Any]) -> Any:
        """The chart of ``key``, rendering it with ``render()`` the first time."""
        body = self._get(key)
        if body is not None:
            return body
        with self._lock:
            gate = self._pending.setdefault(key, threading.Lock())
        with gate:
            body = self._get(key)  # rendered by another request while this one waited
            if body is not None:
                return body
            try:
                body = render()
                with self._lock:
                    self.renders += 1
                    self._put(key, body)
            finally:
                with self._lock:
                    self._pending.pop(key, None)
        return body

    def _put(self, key: Hashable, body: Any) -> None:
        weight = self._weigh(body)
        if weight > self.max_bytes:
            return
        old = self._items.pop(key, None)
        if old is not None:
            self._size -= self._weigh(old)
        self._items[key] = body
        self._size += weight
        while self._size > self.max_bytes:
            _, dropped = self._items.popitem(last=False)
            self._size -= self._weigh(dropped)
