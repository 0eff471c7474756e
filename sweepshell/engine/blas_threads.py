"""One BLAS thread while this process computes model points.

The models work on many small matrices (stability operators of 16 to a few hundred nodes).
A multi-threaded BLAS spends more on waking its threads than it gains on them: apex-force caps
take several times the wall time, and twice that in CPU, with OpenBLAS on two threads
(benchmarks/bench_blas_threads.py). The command line defaults the thread variables to one
before numpy loads (:func:`sweepshell.cli.main.limit_blas_threads`) and dask's worker
processes do the same; a sweep started from Python (a notebook's numpy already loaded with
its threads) computes its in-process blocks and its boundary and refinement points under this
limit, and gets the user's thread count back afterwards. Nested and concurrent uses (the
threads executor) share one limit, lifted when the last one ends.
"""

from __future__ import annotations

import threading
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

__all__ = ["one_blas_thread"]

class _SharedLimit:
    """The process's one BLAS-thread limit: set by the first user, lifted when the last one leaves."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._users = 0
        self._limiter: Any = None

    def enter(self) -> None:
        with self._lock:
            if self._users == 0:
                # only the libraries loaded now are limited: one a model loads on its first call (scipy's BLAS,
                # which numba's kernels call) is limited from the next block on. Importing it here instead
                # would cost every run a quarter second, also those of models that never load it.
                from threadpoolctl import threadpool_limits

                self._limiter = threadpool_limits(limits=1, user_api="blas")
            self._users += 1

    def leave(self) -> None:
        with self._lock:
            self._users -= 1
            if self._users == 0:
                self._limiter.restore_original_limits()
                self._limiter = None


_LIMIT = _SharedLimit()


@contextmanager
def one_blas_thread() -> Iterator[None]:
    """Limit the BLAS libraries numpy and scipy loaded to one thread inside the block."""
    _LIMIT.enter()
    try:
        yield
    finally:
        _LIMIT.leave()
