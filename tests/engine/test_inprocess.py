"""Small sweeps run in the calling process (``executor.kind: auto``); explicit executors are obeyed."""

from __future__ import annotations

import os

import numpy as np
import pytest
import xarray as xr

from sweepshell import open_sweep, run_sweep
from sweepshell.cli.main import main
from sweepshell.config.loader import load_plan
from sweepshell.models.base import Status
from tests.conftest import COLUMN_SWEEP, write_sweep

#: the shared column sweep names no executor: the default (auto) applies
AUTO_SWEEP = COLUMN_SWEEP
assert "executor" not in AUTO_SWEEP


def test_small_sweep_runs_in_process_and_matches_worker_processes(workdir):
    sweep = write_sweep(workdir, AUTO_SWEEP)
    here = run_sweep(str(sweep), ["store.path=results/here.zarr", "reuse=false"])
    assert here.extra["executor"] == "in-process" and here.complete and here.computed == 300
    pool = run_sweep(str(sweep), ["executor=local", "executor.workers=1", "store.path=results/pool.zarr",
                                  "reuse=false"])
    assert pool.extra["executor"] == "local"
    assert here.blocks == pool.blocks > 1 and here.model_seconds > 0  # the same blocks, one after another
    a = open_sweep(workdir / "results" / "here.zarr").load()
    b = open_sweep(workdir / "results" / "pool.zarr").load()
    xr.testing.assert_identical(a.drop_attrs(), b.drop_attrs())
    assert not (workdir / "results" / "here.zarr" / ".claims").exists()  # claims were taken and released


def test_in_process_run_resumes_a_partial_store(workdir):
    sweep = write_sweep(workdir, AUTO_SWEEP)
    run_sweep(str(sweep), ["store.path=results/ref.zarr", "reuse=false"])
    first = run_sweep(str(sweep), ["store.path=results/x.zarr", "reuse=false"])
    assert first.complete
    import zarr  # forget three blocks: their status goes back to pending, as after an interrupted run

    status = zarr.open_array(str(workdir / "results" / "x.zarr" / "status"), mode="r+", zarr_format=3)
    status[:, :] = np.where(np.arange(20)[:, None] < 10, 0, status[:, :]).astype(np.uint8)
    again = run_sweep(str(sweep), ["store.path=results/x.zarr", "reuse=false"])
    assert again.extra["executor"] == "in-process" and again.computed == 150 and again.complete
    xr.testing.assert_identical(open_sweep(workdir / "results" / "x.zarr").load().drop_attrs(),
                                open_sweep(workdir / "results" / "ref.zarr").load().drop_attrs())


@pytest.mark.parametrize(("overrides", "kind", "where"), [
    ([], "auto", "runs in this process: estimated"),
    (["executor.in_process_seconds=0"], "auto", "local worker process"),
    (["executor=local"], "local", "local worker process"),
    (["executor=threads"], "threads", "thread(s) of a dask cluster in this process"),
])
def test_explicit_executors_are_obeyed_and_dry_run_says_where(workdir, capsys, overrides, kind, where):
    sweep = write_sweep(workdir, AUTO_SWEEP)
    plan = load_plan(str(sweep), overrides)
    assert plan.executor.kind == kind
    assert plan.executor.runs_in_process(plan.estimated_seconds()) == (where.startswith("runs in this process"))
    assert main(["run", str(sweep), "--dry-run", *overrides]) == 0
    first = capsys.readouterr().out.splitlines()[0]
    assert where in first and f"(executor {kind})" in first


def test_explicit_threads_executor_starts_a_cluster(workdir):
    sweep = write_sweep(workdir, COLUMN_SWEEP + "executor: {kind: threads, workers: 2}\n")
    summary = run_sweep(str(sweep))
    assert summary.extra["executor"] == "threads"
    assert not np.any(open_sweep(workdir / "results" / "column.zarr").status.values == Status.pending)


def test_in_process_seconds_must_be_a_number(workdir, capsys):
    sweep = write_sweep(workdir, AUTO_SWEEP)
    assert main(["run", str(sweep), "executor.in_process_seconds=-1"]) == 2
    assert "executor.in_process_seconds=-1" in capsys.readouterr().err
    assert not (workdir / "results").exists()


def test_refine_and_boundary_evaluate_in_this_process(store, monkeypatch):
    """``refine`` and ``boundary`` evaluations run the model here: no cluster is ever started for them."""
    from sweepshell.engine import executors
    from sweepshell.engine.evaluate import store_evaluator
    from sweepshell.engine.refine import refine_store
    from sweepshell.query.boundary import find_boundary

    def refuse(*args, **kwargs):
        raise AssertionError("a dask cluster was started")

    monkeypatch.setattr(executors, "start_client", refuse)
    assert refine_store(store, levels=1).evaluations > 0
    ds = open_sweep(store)
    boundary, _ = find_boundary(ds, "stiffness_ratio", "load_ratio", ("stable", "buckled"), bisections=2,
                                evaluator=store_evaluator(ds))
    assert boundary.evaluations > 0


def test_command_line_defaults_blas_to_one_thread_and_keeps_a_users_choice(monkeypatch):
    """In-process blocks use one core, as dask's worker processes do; a count the user set is kept."""
    from sweepshell.cli.main import BLAS_THREAD_VARIABLES, limit_blas_threads

    for name in BLAS_THREAD_VARIABLES:
        monkeypatch.delenv(name, raising=False)
    monkeypatch.setenv("MKL_NUM_THREADS", "4")
    limit_blas_threads()
    assert os.environ["OPENBLAS_NUM_THREADS"] == "1" and os.environ["OMP_NUM_THREADS"] == "1"
    assert os.environ["MKL_NUM_THREADS"] == "4"
