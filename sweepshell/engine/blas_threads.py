"""One BLAS thread while this process computes model points.

The models work on many small matrices (stability operators of 16 to a few hundred nodes).
A multi-threaded BLAS spends more on waking its threads than it gains on them: apex-force caps
take several times the wall time, and twice that in CPU, with OpenBLAS on two threads
(benchmarks/bench_blas_threads.py). The command line defaults the thread variables to one
before numpy loads (:func:`sweepshell.cli.main.limit_blas_threads`) and dask's worker
processes do the same. A sweep started from Python (a notebook's numpy already loaded with its
threads) computes its in-process blocks, the blocks of the threads executor and its boundary
and refinement points under this limit, set and lifted by the calling thread (the run, or the
evaluator), so the caller's count comes back afterwards.

Setting the limit walks the process's loaded libraries (``dl_iterate_phdr`` with a Python
callback, which holds the dynamic loader's lock and needs the GIL), so it is set before the run
starts threads of its own: a thread importing an extension module holds the GIL and waits for
that lock, and the two would wait for each other for ever.
"""

from __future__ import annotations

import sys
from collections.abc import Iterator
from contextlib import contextmanager

__all__ = ["one_blas_thread"]


@contextmanager
def one_blas_thread() -> Iterator[None]:
    """Limit the BLAS libraries loaded in this process to one thread inside the block (nestable)."""
    if "numba" in sys.modules:
        # numba's kernels call scipy's BLAS, which numba loads on its first kernel load; loading it
        # now (it comes anyway) puts it under the limit, which covers only the libraries loaded
        import scipy.linalg  # noqa: F401
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=1, user_api="blas"):
        yield
