"""The byte-bounded cache of operator builders."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from sweepshell.numerics.array_cache import ArrayCache, cache_arrays, count_array_bytes


@dataclass(frozen=True)
class Pair:
    a: np.ndarray
    b: np.ndarray | None


def test_counts_the_arrays_inside_tuples_dicts_and_dataclasses():
    value = (np.zeros(10), {1: np.zeros(5, dtype=np.float32)}, Pair(np.zeros((2, 3)), None), "label", 3)
    assert count_array_bytes(value) == 80 + 20 + 48


def test_keeps_results_while_they_fit_and_drops_the_least_recently_used():
    calls: list[int] = []

    @cache_arrays(3 * 800)
    def build(n: int) -> np.ndarray:
        calls.append(n)
        return np.full(100, float(n))  # 800 bytes

    first = build(1)
    assert build(1) is first
    build(2)
    build(3)
    build(1)  # 1 is now the most recently used; 2 the least
    build(4)  # over the budget: 2 goes
    assert build.held_bytes == 3 * 800
    assert calls == [1, 2, 3, 4]
    build(1), build(3), build(4)
    assert calls == [1, 2, 3, 4]
    build(2)
    assert calls == [1, 2, 3, 4, 2]


def test_a_result_larger_than_the_budget_is_returned_but_not_kept():
    cache = ArrayCache(np.zeros, 1000)
    assert cache(200).shape == (200,)
    assert cache.held_bytes == 0
    cache(10)
    assert cache.held_bytes == 80
    cache.cache_clear()
    assert cache.held_bytes == 0


def test_keyword_and_positional_calls_give_the_same_values():
    cache = ArrayCache(lambda n, scale=1.0: np.arange(n) * scale, 10_000)
    np.testing.assert_array_equal(cache(4, scale=2.0), cache(4, 2.0))
    assert cache.__wrapped__(3).tolist() == [0.0, 1.0, 2.0]
