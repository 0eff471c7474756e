"""Several runners on one store, and scale-out on a real dask.distributed cluster."""

from __future__ import annotations

import os
import re
import signal
import threading
import time

import numpy as np
import pytest
import xarray as xr

from sweepshell import open_sweep, run_sweep
from sweepshell.engine.claims import ClaimBook
from sweepshell.models.base import Status
from tests.conftest import write_sweep
from tests.engine.test_faults import SLOW_SWEEP, _kill_group, _start, _wait_for

pytestmark = pytest.mark.faults


def _computed(out: bytes) -> int:
    m = re.search(rb"computed (\d+) points", out)
    return int(m.group(1)) if m else 0


def test_two_runners_share_the_work_and_compute_each_block_once(workdir):
    sweep = write_sweep(workdir, SLOW_SWEEP)
    reference = run_sweep(str(sweep), ["executor=threads", "store.path=reference.zarr"])
    first = _start(sweep, workdir, "executor.workers=1")
    assert _wait_for((workdir / "results" / "slow_column.zarr").exists, first)
    second = _start(sweep, workdir, "executor.workers=1")
    out1, err1 = first.communicate(timeout=300)
    out2, err2 = second.communicate(timeout=300)
    assert first.returncode == 0 and second.returncode == 0, (err1 + err2).decode()
    assert _computed(out1) > 0 and _computed(out2) > 0, (out1, out2)
    assert _computed(out1) + _computed(out2) == reference.total  # no block computed twice
    got = open_sweep(workdir / "results" / "slow_column.zarr").load()
    want = open_sweep(workdir / "reference.zarr").load()
    xr.testing.assert_identical(got.drop_attrs(), want.drop_attrs())


def test_killing_one_runner_loses_nothing(workdir):
    sweep = write_sweep(workdir, SLOW_SWEEP)
    run_sweep(str(sweep), ["executor=threads", "store.path=reference.zarr"])
    store = workdir / "results" / "slow_column.zarr"
    victim = _start(sweep, workdir, "executor.workers=1")
    assert _wait_for(store.exists, victim)
    survivor = _start(sweep, workdir, "executor.workers=1")
    time.sleep(1.5)
    _kill_group(victim)
    _, err = survivor.communicate(timeout=300)
    assert survivor.returncode == 0, err.decode()
    ledger = open_sweep(store).status.values
    assert not np.any(ledger == Status.pending)
    got = open_sweep(store).load()
    want = open_sweep(workdir / "reference.zarr").load()
    xr.testing.assert_identical(got.drop_attrs(), want.drop_attrs())


def test_live_claims_are_respected_and_stale_ones_taken_over(tmp_path):
    a = ClaimBook(tmp_path, ttl=0.5)
    b = ClaimBook(tmp_path, ttl=0.5)
    assert a.try_claim((0, 1))
    assert not b.try_claim((0, 1))       # a is alive and fresh
    a.heartbeat()
    assert not b.try_claim((0, 1))
    time.sleep(0.6)                       # a stopped beating (asleep, or on a dead machine)
    assert b.try_claim((0, 1)) and b.taken_over == 1
    b.release((0, 1))
    assert a.try_claim((0, 1))


def test_distributed_cluster_survives_a_killed_worker(workdir):
    from distributed import Client, LocalCluster

    sweep = write_sweep(workdir, SLOW_SWEEP)
    run_sweep(str(sweep), ["executor=threads", "store.path=reference.zarr"])
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0") as cluster, \
            Client(cluster) as client:
        pids = list(client.run(os.getpid).values())
        errors: list[BaseException] = []

        def go() -> None:
            try:
                run_sweep(str(sweep), ["executor=distributed", f"executor.address={cluster.scheduler_address}"])
            except BaseException as exc:  # surfaced below
                errors.append(exc)

        thread = threading.Thread(target=go)
        thread.start()
        store = workdir / "results" / "slow_column.zarr"
        t_end = time.monotonic() + 60
        while time.monotonic() < t_end and not (store.exists() and np.any(open_sweep(store).status.values)):
            time.sleep(0.05)
        os.kill(pids[0], signal.SIGKILL)
        thread.join(timeout=300)
        assert not errors, errors
    got = open_sweep(workdir / "results" / "slow_column.zarr").load()
    want = open_sweep(workdir / "reference.zarr").load()
    xr.testing.assert_identical(got.drop_attrs(), want.drop_attrs())
