"""A least-recently-used cache for pure functions whose results are numpy arrays, bounded by their bytes.

Operator caches keyed by grid size hold matrices from a few kilobytes to megabytes each, so a
count bound is either too small for a sweep over many grid sizes (every block rebuilds the
operators of every size) or unbounded in memory on large grids. This cache keeps as many
results as fit in a byte budget, least recently used first out.
"""

from __future__ import annotations

import dataclasses
import threading
from collections import OrderedDict
from collections.abc import Callable, Hashable
from functools import update_wrapper
from typing import Any, Generic, TypeVar

import numpy as np

__all__ = ["ArrayCache", "cache_arrays", "count_array_bytes"]

T = TypeVar("T")


def count_array_bytes(value: Any) -> int:
    """Return the bytes of the numpy arrays in ``value`` (arrays, tuples, lists, dicts and dataclasses of them)."""
    if isinstance(value, np.ndarray):
        return int(value.nbytes)
    if isinstance(value, (tuple, list)):
        return sum(count_array_bytes(v) for v in value)
    if isinstance(value, dict):
        return sum(count_array_bytes(v) for v in value.values())
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return sum(count_array_bytes(getattr(value, f.name)) for f in dataclasses.fields(value))
    return 0


class ArrayCache(Generic[T]):
    """The cached form of ``function``: same call, results kept while they fit in ``max_bytes``.

    A result larger than the whole budget is returned without being kept. Calls are
    thread-safe; two threads missing the same key both compute it (the function is pure).
    """

    def __init__(self, function: Callable[..., T], max_bytes: int) -> None:
        self.__wrapped__ = function
        self.max_bytes = int(max_bytes)
        self._entries: OrderedDict[Hashable, tuple[T, int]] = OrderedDict()
        self._bytes = 0
        self._lock = threading.Lock()
        update_wrapper(self, function)

    def __call__(self, *args: Hashable, **kwargs: Hashable) -> T:
        key = (args, tuple(sorted(kwargs.items()))) if kwargs else args
        with self._lock:
            hit = self._entries.get(key)
            if hit is not None:
                self._entries.move_to_end(key)
                return hit[0]
        value = self.__wrapped__(*args, **kwargs)
        size = count_array_bytes(value)
        if size > self.max_bytes:
            return value
        with self._lock:
            if key not in self._entries:
                self._entries[key] = (value, size)
                self._bytes += size
                while self._bytes > self.max_bytes:
                    _, (_, dropped) = self._entries.popitem(last=False)
                    self._bytes -= dropped
        return value

    @property
    def held_bytes(self) -> int:
        """Bytes of the results held now."""
        return self._bytes

    def cache_clear(self) -> None:
        """Drop every held result."""
        with self._lock:
            self._entries.clear()
            self._bytes = 0


def cache_arrays(max_bytes: int) -> Callable[[Callable[..., T]], ArrayCache[T]]:
    """Decorate a pure function of hashable arguments with an :class:`ArrayCache` of ``max_bytes``."""
    def wrap(function: Callable[..., T]) -> ArrayCache[T]:
        return ArrayCache(function, max_bytes)
    return wrap
