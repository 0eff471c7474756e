"""Model points computed in this process run on one BLAS thread; the caller's count comes back afterwards."""

from __future__ import annotations

import threading

import numpy as np
import pytest
from threadpoolctl import threadpool_info, threadpool_limits

from sweepshell.engine.blas_threads import one_blas_thread
from sweepshell.engine.worker import solve_points
from sweepshell.models import make_model
from tests.conftest import model_inputs


def blas_threads() -> set[int]:
    return {int(lib["num_threads"]) for lib in threadpool_info() if lib["user_api"] == "blas"}


@pytest.fixture
def two_threads():
    import scipy.linalg  # noqa: F401  (its BLAS too)

    with threadpool_limits(limits=2, user_api="blas"):
        if blas_threads() != {2}:
            pytest.skip(f"this BLAS does not take a thread count of 2: {blas_threads()}")
        yield


def test_the_limit_holds_inside_and_is_lifted_after(two_threads):
    with one_blas_thread():
        assert blas_threads() == {1}
        with one_blas_thread():
            assert blas_threads() == {1}
        assert blas_threads() == {1}  # the outer use still computes
    assert blas_threads() == {2}


def test_overlapping_threads_share_one_limit(two_threads):
    # the threads executor: one block ends while another still computes; the limit stays until both end
    inside, release, seen = threading.Event(), threading.Event(), []

    def long_block() -> None:
        with one_blas_thread():
            inside.set()
            release.wait(10)
            seen.append(blas_threads())

    worker = threading.Thread(target=long_block)
    worker.start()
    inside.wait(10)
    with one_blas_thread():
        pass
    assert blas_threads() == {1}
    release.set()
    worker.join(10)
    assert seen == [{1}]
    assert blas_threads() == {2}


def test_solving_points_runs_under_the_limit(two_threads, monkeypatch):
    model = make_model("winkler_column", {})
    seen = []
    solve = model.solve_batch
    monkeypatch.setattr(model, "solve_batch", lambda inputs: (seen.append(blas_threads()), solve(inputs))[1])
    inputs = model_inputs(model, load_ratio=[0.5, 5.0])
    result = solve_points(model, inputs)
    assert seen == [{1}]
    np.testing.assert_array_equal(result.regime, [0, 1])  # stable below the Euler load, buckled above
    assert blas_threads() == {2}
