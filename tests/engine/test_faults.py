"""A run killed with SIGKILL at any instant resumes to a store identical to an uninterrupted run."""

from __future__ import annotations

import contextlib
import os
import re
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from sweepshell import open_sweep, run_sweep
from sweepshell.models.base import Status
from tests.conftest import CONFIGS, write_sweep

pytestmark = pytest.mark.faults

SLOW_SWEEP = """\
name: slow_column
model: winkler_column
settings: {work_seconds: 0.01}
fixed: {end: pinned}
axes:
  stiffness_ratio: {logspace: [-1, 3, 24]}
  load_ratio: {linspace: [0.5, 40, 25]}
block: {points: 25}
"""


def _start(sweep: Path, cwd: Path, *extra: str) -> subprocess.Popen[bytes]:
    env = dict(os.environ, SWEEPSHELL_CONFIG_DIR=str(CONFIGS))
    return subprocess.Popen([sys.executable, "-m", "sweepshell", "run", str(sweep), "--progress", "none", *extra],
                            cwd=cwd, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            start_new_session=True)


def _kill_group(proc: subprocess.Popen[bytes]) -> None:
    with contextlib.suppress(ProcessLookupError):
        os.killpg(proc.pid, signal.SIGKILL)
    proc.wait(timeout=60)


def _wait_for(predicate, proc: subprocess.Popen[bytes], timeout: float = 60.0) -> bool:
    t_end = time.monotonic() + timeout
    while time.monotonic() < t_end:
        if predicate():
            return True
        if proc.poll() is not None:
            return False
        time.sleep(0.01)
    return False


def _computed_and_final(err: bytes, store: Path) -> tuple[int, int]:
    """Points the interrupted run says it computed, and points final in its (new) store."""
    said = re.search(rb"computed (\d+) points", err)
    assert said, err.decode()
    return int(said.group(1)), int(np.sum(open_sweep(store).status.values != Status.pending))


def test_sigkill_at_random_instants_then_resume_is_identical(workdir, rng):
    sweep = write_sweep(workdir, SLOW_SWEEP)
    reference = run_sweep(str(sweep), ["executor=threads", "store.path=reference.zarr"])
    assert reference.complete
    store = workdir / "results" / "slow_column.zarr"
    # 1: during template creation (as soon as the temporary template folder appears)
    proc = _start(sweep, workdir, "executor.workers=2")
    _wait_for(lambda: any(workdir.glob("results/*sweepshell-tmp*")) or store.exists(), proc)
    _kill_group(proc)
    # 2..6: at random instants while blocks are being computed and written
    killed_mid_run = 0
    for delay in rng.uniform(0.05, 1.2, size=5):
        proc = _start(sweep, workdir, "executor.workers=2")
        assert _wait_for(store.exists, proc) or proc.returncode == 0
        time.sleep(delay)
        finished = proc.poll() is not None
        _kill_group(proc)
        ledger = open_sweep(store).status.values
        assert set(np.unique(ledger)) <= {Status.pending, Status.ok, Status.no_instability}
        killed_mid_run += not finished and bool(np.any(ledger == Status.pending))
    assert killed_mid_run >= 2, "no kill happened while the store was being filled; lengthen the sweep"
    proc = _start(sweep, workdir, "executor.workers=2")
    out, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err.decode()
    assert b"points" in out
    got = open_sweep(store).load()
    want = open_sweep(workdir / "reference.zarr").load()
    xr.testing.assert_identical(got.drop_attrs(), want.drop_attrs())
    assert not list(workdir.glob("results/*sweepshell-tmp*")), "a half-built template was left behind"


def test_interrupt_exits_130_and_the_next_run_continues(workdir):
    sweep = write_sweep(workdir, SLOW_SWEEP)
    store = workdir / "results" / "slow_column.zarr"
    proc = _start(sweep, workdir, "executor=local", "executor.workers=2")
    # interrupt mid-run, once the first blocks are final, as a terminal's Ctrl-C does: the whole process group,
    # worker processes included
    assert _wait_for(lambda: store.exists() and bool(np.any(open_sweep(store).status.values)), proc, timeout=120)
    os.killpg(proc.pid, signal.SIGINT)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 130, err.decode()
    assert b"run the same command again to continue" in err
    assert b"Traceback" not in err, err.decode()  # the workers leave Ctrl-C to the runner
    computed, final = _computed_and_final(err, store)
    assert computed == final > 0  # blocks written by workers but not yet collected count too
    proc = _start(sweep, workdir, "executor.workers=2")
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err.decode()
    ds = open_sweep(workdir / "results" / "slow_column.zarr")
    assert not np.any(ds.status.values == Status.pending)


def test_torn_status_chunk_is_recomputed(workdir):
    sweep = write_sweep(workdir, SLOW_SWEEP.replace("work_seconds: 0.01", "work_seconds: 0.0"))
    run_sweep(str(sweep), ["executor=threads"])
    path = workdir / "results" / "slow_column.zarr"
    reference = open_sweep(path).load()
    chunk = next(p for p in sorted((path / "status" / "c").rglob("*")) if p.is_file())
    chunk.write_bytes(chunk.read_bytes()[:5])  # a write cut short by a crash
    summary = run_sweep(str(sweep), ["executor=threads"])
    assert summary.computed == 25 and summary.complete
    xr.testing.assert_identical(open_sweep(path).load().drop_attrs(), reference.drop_attrs())


def test_stale_template_folder_is_cleaned_and_store_created(workdir):
    sweep = write_sweep(workdir, SLOW_SWEEP.replace("work_seconds: 0.01", "work_seconds: 0.0"))
    stale = workdir / "results" / "slow_column.zarr.sweepshell-tmp-999999999"
    stale.mkdir(parents=True)
    (stale / "zarr.json").write_text("{")
    summary = run_sweep(str(sweep), ["executor=threads"])
    assert summary.complete and not stale.exists()


def test_in_process_run_survives_ctrl_c_and_sigkill(workdir):
    """The in-process executor keeps the dask path's guarantees: Ctrl-C exits 130, SIGKILL loses nothing final."""
    sweep = write_sweep(workdir, SLOW_SWEEP)
    here = "executor.in_process_seconds=600"  # ~6 s of work: computed in the runner's own process
    store = workdir / "results" / "slow_column.zarr"
    done = lambda n: lambda: store.exists() and int(np.sum(open_sweep(store).status.values != 0)) >= n  # noqa: E731
    proc = _start(sweep, workdir, here)
    assert _wait_for(done(1), proc, timeout=120)
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 130, err.decode()
    assert b"run the same command again to continue" in err
    computed, before = _computed_and_final(err, store)
    assert computed == before > 0
    proc = _start(sweep, workdir, here)
    assert _wait_for(done(before + 50), proc, timeout=120)
    _kill_group(proc)
    proc = _start(sweep, workdir, here)
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err.decode()
    reference = run_sweep(str(sweep), ["executor=threads", "store.path=reference.zarr"])
    assert reference.complete
    got = open_sweep(store).load()
    want = open_sweep(workdir / "reference.zarr").load()
    xr.testing.assert_identical(got.drop_attrs(), want.drop_attrs())
