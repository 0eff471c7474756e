"""Model points computed in the caller's process run on one BLAS thread; the caller's count comes back afterwards."""

from __future__ import annotations

import numpy as np
import pytest
from threadpoolctl import threadpool_info, threadpool_limits

from sweepshell import open_sweep, run_sweep
from sweepshell.engine.blas_threads import one_blas_thread
from sweepshell.models import make_model
from sweepshell.models.base import Status
from tests.conftest import COLUMN_SWEEP, write_sweep


def blas_threads() -> set[int]:
    return {int(lib["num_threads"]) for lib in threadpool_info() if lib["user_api"] == "blas"}


@pytest.fixture
def two_threads():
    """The caller's BLAS on two threads (a notebook's default on this machine)."""
    import scipy.linalg  # noqa: F401  (its BLAS too)

    with threadpool_limits(limits=2, user_api="blas"):
        if blas_threads() != {2}:
            pytest.skip(f"this BLAS does not take a thread count of 2: {blas_threads()}")
        yield


@pytest.fixture
def seen_threads(monkeypatch):
    """The BLAS thread counts the column model's ``solve_batch`` runs with, one set per call."""
    cls = type(make_model("winkler_column", {}))
    solve, seen = cls.solve_batch, []

    def recording(self, inputs):  # type: ignore[no-untyped-def]
        seen.append(frozenset(blas_threads()))
        return solve(self, inputs)

    monkeypatch.setattr(cls, "solve_batch", recording)
    return seen


def test_the_limit_holds_inside_nested_uses_and_is_lifted_after(two_threads):
    with one_blas_thread():
        assert blas_threads() == {1}
        with one_blas_thread():
            assert blas_threads() == {1}
        assert blas_threads() == {1}  # the outer use still computes
    assert blas_threads() == {2}


@pytest.mark.parametrize("executor", ["auto", "threads"])
def test_blocks_computed_in_this_process_use_one_thread(workdir, two_threads, seen_threads, executor):
    # auto: a small sweep runs in this process; threads: dask worker threads of this process
    sweep = write_sweep(workdir, COLUMN_SWEEP + f"executor: {{kind: {executor}, workers: 2}}\n")
    summary = run_sweep(str(sweep), ["reuse=false"])
    assert summary.complete and summary.extra["executor"] == ("in-process" if executor == "auto" else "threads")
    assert seen_threads and set(seen_threads) == {frozenset({1})}
    assert blas_threads() == {2}
    assert not np.any(open_sweep(workdir / "results" / "column.zarr").status.values == Status.pending)


def test_refinement_points_use_one_thread(store, two_threads, seen_threads):
    from sweepshell.engine.refine import refine_store

    assert refine_store(store, levels=1).evaluations > 0
    assert seen_threads and set(seen_threads) == {frozenset({1})}
    assert blas_threads() == {2}


def test_the_limit_is_set_before_the_run_starts_threads(workdir, monkeypatch):
    # setting the limit walks the loaded libraries under the dynamic loader's lock and needs the GIL; a
    # worker-starting thread importing an extension module holds the GIL and waits for that lock. With the
    # limit set after the threads executor's start thread began, `sweepshell run` hung for ever (seen in the
    # lowest-versions check). So the limit must be taken while the run has no threads of its own
    import threading

    from sweepshell.engine import blas_threads

    started_with: list[list[str]] = []
    limit = blas_threads.one_blas_thread

    def recording():  # type: ignore[no-untyped-def]
        started_with.append([t.name for t in threading.enumerate() if t.name.startswith("sweepshell-start")])
        return limit()

    monkeypatch.setattr("sweepshell.engine.runner.one_blas_thread", recording)
    sweep = write_sweep(workdir, COLUMN_SWEEP + "executor: {kind: threads, workers: 2}\n")
    assert run_sweep(str(sweep), ["reuse=false"]).complete
    assert started_with == [[]]
