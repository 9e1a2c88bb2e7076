"""A bounded, thread-safe least-recently-used cache of compiled models, keyed by fingerprint."""

from __future__ import annotations

import threading
from collections import OrderedDict
from collections.abc import Callable
from typing import Generic, TypeVar

V = TypeVar("V")


class ModelCache(Generic[V]):
    """Keeps at most ``capacity`` values of at most ``max_bytes`` in all; the least recently
    used are dropped first. Each value is put with its size in bytes; one larger than
    ``max_bytes`` is not kept.

    ``get`` and ``put`` take a lock for a few dictionary operations only. Building a value
    happens outside the lock, so a slow compilation never holds up other requests; two
    requests that miss on the same key at the same moment may both build it, and the second
    simply replaces the first (both are equal).
    """

    def __init__(self, capacity: int, max_bytes: int | None = None):
        if capacity < 0:
            raise ValueError("capacity must be at least 0")
        self.capacity = capacity
        self.max_bytes = max_bytes
        self._items: OrderedDict[str, tuple[V, int]] = OrderedDict()
        self._lock = threading.Lock()
        self.hits = 0
        self.misses = 0
        self.bytes = 0

    def __len__(self) -> int:
        return len(self._items)

    def __contains__(self, key: str) -> bool:
        return key in self._items

    def get(self, key: str) -> V | None:
        """The value for ``key`` (now the most recently used), or None; counts a hit or miss."""
        with self._lock:
            item = self._items.get(key)
            if item is None:
                self.misses += 1
                return None
            self._items.move_to_end(key)
            self.hits += 1
            return item[0]

    def count_hit(self) -> None:
        """Count a hit served from elsewhere (a stored basis sent inline)."""
        with self._lock:
            self.hits += 1

    def put(self, key: str, value: V, size: int = 0) -> None:
        if self.capacity == 0 or (self.max_bytes is not None and size > self.max_bytes):
            return
        with self._lock:
            old = self._items.pop(key, None)
            if old is not None:
                self.bytes -= old[1]
            self._items[key] = (value, size)
            self.bytes += size
            while len(self._items) > self.capacity or (
                self.max_bytes is not None and self.bytes > self.max_bytes
            ):
                _, (_, dropped) = self._items.popitem(last=False)
                self.bytes -= dropped

    def get_or_build(self, key: str, build: Callable[[], V]) -> V:
        value = self.get(key)
        if value is None:
            value = build()
            self.put(key, value)
        return value
