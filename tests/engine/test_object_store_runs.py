"""Runs on an object store (a local S3-compatible server): kills and resume, two runners, a dask cluster.

Every runner is a separate ``sweepshell run`` process that reaches the server through the standard AWS
environment variables set by the ``s3_server`` fixture (credentials and ``AWS_ENDPOINT_URL``).
"""

from __future__ import annotations

import os
import threading
import time

import numpy as np
import pytest
import xarray as xr

from sweepshell import open_sweep, run_sweep
from sweepshell.store.location import as_path
from sweepshell.store.metadata import is_store
from tests.conftest import write_sweep
from tests.engine.test_faults import _kill_group, _start, _wait_for
from tests.engine.test_shared_runs import _computed

pytestmark = pytest.mark.faults

#: 300 points in 12 blocks, about 0.1 s of model time per block
SWEEP = """\
name: s3_column
model: winkler_column
settings: {work_seconds: 0.004}
fixed: {end: pinned}
axes:
  stiffness_ratio: {logspace: [-1, 3, 12]}
  load_ratio: {linspace: [0.5, 40, 25]}
block: {points: 25}
"""


def _ledger_started(url: str) -> bool:
    try:
        return is_store(url) and bool(np.any(open_sweep(url).status.values))
    except Exception:  # the store is being created
        return False


def _same(url: str, reference) -> None:
    got = open_sweep(url).load()
    want = open_sweep(reference).load()
    xr.testing.assert_identical(got.drop_attrs(), want.drop_attrs())


def test_sigkill_at_random_instants_then_resume_is_identical(workdir, s3_bucket, rng):
    sweep = write_sweep(workdir, SWEEP)
    run_sweep(str(sweep), ["executor=threads", "store.path=reference.zarr"])
    url = f"{s3_bucket}/results/s3_column.zarr"
    loc = as_path(url)
    # 1: during creation (as soon as anything of the store appears under its prefix)
    proc = _start(sweep, workdir, f"store.path={url}", "executor=threads", "executor.workers=2")
    _wait_for(lambda: bool(loc.find()), proc)
    _kill_group(proc)
    # 2, 3: at random instants while blocks are computed and written
    for delay in rng.uniform(0.3, 2.0, size=2):
        proc = _start(sweep, workdir, f"store.path={url}", "executor=threads", "executor.workers=2")
        _wait_for(lambda: is_store(url), proc, timeout=60)
        time.sleep(float(delay))
        _kill_group(proc)
    proc = _start(sweep, workdir, f"store.path={url}", "executor=threads", "executor.workers=2")
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err.decode()
    _same(url, workdir / "reference.zarr")
    assert not any(k.startswith((".claims/", ".sweepshell")) for k in loc.find())  # no leftovers


def test_two_runners_on_one_bucket_compute_each_block_once(workdir, s3_bucket):
    # 6 s of work each way: both runners get blocks even when one starts a few seconds after the other
    sweep = write_sweep(workdir, SWEEP.replace("work_seconds: 0.004", "work_seconds: 0.02"))
    reference = run_sweep(str(sweep), ["executor=threads", "store.path=reference.zarr"])
    url = f"{s3_bucket}/results/s3_column.zarr"
    # started together, they also race to create the store: one uploads it, the other waits for its root
    first = _start(sweep, workdir, f"store.path={url}", "executor=threads", "executor.workers=1")
    second = _start(sweep, workdir, f"store.path={url}", "executor=threads", "executor.workers=1")
    out1, err1 = first.communicate(timeout=300)
    out2, err2 = second.communicate(timeout=300)
    assert first.returncode == 0 and second.returncode == 0, (err1 + err2).decode()
    assert _computed(out1) > 0 and _computed(out2) > 0, (out1, out2)
    assert _computed(out1) + _computed(out2) == reference.total  # no block computed twice
    _same(url, workdir / "reference.zarr")


def test_a_local_cluster_writes_its_blocks_straight_to_the_bucket(workdir, s3_bucket, monkeypatch):
    from distributed import Client, LocalCluster

    from sweepshell.store import location

    monkeypatch.setattr(location, "_OPTIONS", {})  # store.options are registered for the process: keep them here

    sweep = write_sweep(workdir, SWEEP.replace("work_seconds: 0.004", "work_seconds: 0.0"))
    run_sweep(str(sweep), ["executor=threads", "store.path=reference.zarr"])
    url = f"{s3_bucket}/results/s3_column.zarr"
    # the workers are processes: they get the credentials from the environment they start with, the endpoint
    # from store.options (sent with each task)
    endpoint = os.environ.pop("AWS_ENDPOINT_URL")
    try:
        with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0") as cluster, \
                Client(cluster) as client:
            assert all(v is None for v in client.run(lambda: os.environ.get("AWS_ENDPOINT_URL")).values())
            errors: list[BaseException] = []

            def go() -> None:
                try:
                    run_sweep(str(sweep), ["executor=distributed", f"executor.address={cluster.scheduler_address}",
                                           f"store.path={url}", f"store.options.endpoint_url={endpoint}"])
                except BaseException as exc:  # surfaced below
                    errors.append(exc)

            thread = threading.Thread(target=go)
            thread.start()
            thread.join(timeout=300)
            assert not errors, errors
            pids = set(client.run(os.getpid).values())
    finally:
        os.environ["AWS_ENDPOINT_URL"] = endpoint
    assert os.getpid() not in pids
    _same(url, workdir / "reference.zarr")
