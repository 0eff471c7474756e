"""Lost data is found, refused and recomputed — never passed off as results.

Each test deletes part of a finished store (one output chunk, a whole output array), then runs
``verify``, ``verify --repair``, ``run``, ``query`` and a reusing sweep through the CLI and compares
the final store with an undamaged reference computed the same way.
"""

from __future__ import annotations

import errno
import json
import shutil
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from sweepshell.cli.main import main
from tests.conftest import SMALL_COLUMN_ETA as ETA
from tests.conftest import SMALL_COLUMN_LOAD as LOAD
from tests.conftest import SMALL_COLUMN_STORE as STORE
from tests.conftest import SMALL_COLUMN_SWEEP as SWEEP
from tests.conftest import run_column_store

pytestmark = pytest.mark.faults

RUN = ["run", "col.yaml", "--progress", "none"]
OUTPUTS = ("critical_load", "mode_number", "margin", "load_path")


@pytest.fixture(scope="module")
def reference(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("loss") / "column.zarr"
    return run_column_store(path, ETA, LOAD, block_points=3)


@pytest.fixture
def store(reference, workdir) -> Path:
    shutil.copytree(reference, workdir / STORE)
    (workdir / "col.yaml").write_text(SWEEP)
    return workdir / STORE


def _same_as_reference(store: Path, reference: Path) -> None:
    got = xr.open_zarr(store, consolidated=True, zarr_format=3).load()
    want = xr.open_zarr(reference, consolidated=True, zarr_format=3).load()
    for name in (*OUTPUTS, "regime", "status"):
        np.testing.assert_array_equal(got[name].values, want[name].values, err_msg=name)


def _one_error_line(err: str) -> str:
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in err, err
    return lines[0]


def test_deleted_output_chunk_is_found_refused_and_recomputed(store, reference, capsys):
    (store / "critical_load" / "c" / "2" / "0").unlink()

    assert main(["verify", STORE]) == 1
    out = capsys.readouterr().out
    assert "critical_load block [2, 0] has no chunk on disk (lost data)" in out
    assert "sweepshell verify --repair" in out

    assert main(["query", STORE, "--format", "csv"]) == 2
    assert "lost data: critical_load block [2, 0]" in _one_error_line(capsys.readouterr().err)
    assert main(["status", STORE]) == 0
    assert "1 final blocks lost chunks" in capsys.readouterr().out

    # run notices the missing chunk by listing (no repair needed) and recomputes only that block
    assert main(RUN) == 0
    line = capsys.readouterr().out
    assert "computed 3 points" in line and "1 blocks recomputed because chunks were missing" in line
    _same_as_reference(store, reference)
    assert main(["verify", STORE]) == 0
    capsys.readouterr()


def test_deleted_output_array_needs_repair_then_run_restores_it(store, reference, capsys):
    shutil.rmtree(store / "margin")

    assert main(["verify", STORE]) == 1
    out = capsys.readouterr().out
    assert "array margin is missing" in out and "margin block [0, 0] has no chunk on disk" in out

    assert main(RUN) == 2
    assert "array margin is missing" in _one_error_line(capsys.readouterr().err)
    assert main(["query", STORE]) == 2
    capsys.readouterr()

    assert main(["verify", STORE, "--repair"]) == 1
    out = capsys.readouterr().out
    assert "repaired: margin/zarr.json rebuilt from the consolidated metadata" in out
    assert "repaired: 4 blocks set back to pending" in out
    assert main(["verify", STORE]) == 0  # consistent: every block pending, nothing passed off as final
    assert "12 pending" in capsys.readouterr().out

    assert main(RUN) == 0
    assert "computed 12 points" in capsys.readouterr().out
    _same_as_reference(store, reference)


def test_repair_resets_only_the_damaged_block_and_keeps_status_last(store, reference, capsys):
    (store / "regime" / "c" / "1" / "0").unlink()
    assert main(["verify", STORE, "--repair", "--json"]) == 1
    report = json.loads(capsys.readouterr().out)
    assert report["repaired_blocks"] == [[1, 0]]
    status = xr.open_zarr(store, consolidated=True, zarr_format=3)["status"].values
    assert (status[1] == 0).all() and (status[[0, 2, 3]] != 0).all()
    assert main(RUN) == 0
    _same_as_reference(store, reference)
    capsys.readouterr()


def test_reuse_never_copies_from_a_block_that_lost_a_chunk(store, reference, workdir, capsys):
    (store / "load_path" / "c" / "3" / "0" / "0").unlink()
    other = SWEEP.replace("results/column.zarr", "results/other.zarr").replace("reuse: false", "reuse: true")
    (workdir / "other.yaml").write_text(other)
    assert main(["run", "other.yaml", "--progress", "none"]) == 0
    line = capsys.readouterr().out
    assert "(9 reused from other stores)" in line  # 3 of 4 blocks; the damaged one is computed
    _same_as_reference(workdir / "results" / "other.zarr", reference)


def test_reuse_never_copies_nan_at_a_trusted_point(store, reference, workdir, capsys):
    import zarr

    zarr.open_array(str(store / "critical_load"), mode="r+", zarr_format=3)[0, 0] = np.nan
    other = SWEEP.replace("results/column.zarr", "results/other.zarr").replace("reuse: false", "reuse: true")
    (workdir / "other.yaml").write_text(other)
    assert main(["run", "other.yaml", "--progress", "none"]) == 0
    assert "(11 reused from other stores)" in capsys.readouterr().out
    _same_as_reference(workdir / "results" / "other.zarr", reference)
    assert main(["verify", STORE]) == 1
    assert "no value in critical_load" in capsys.readouterr().out


def test_disk_full_mid_run_is_one_line_exit_3_and_resumable(workdir, reference, monkeypatch, capsys):
    (workdir / "col.yaml").write_text(SWEEP)
    from sweepshell.store import writer

    real = writer.write_block
    calls = {"n": 0}

    def write_until_full(*args, **kwargs):
        calls["n"] += 1
        if calls["n"] > 2:
            raise OSError(errno.ENOSPC, "No space left on device", "results/column.zarr/critical_load/c/2/0")
        return real(*args, **kwargs)

    monkeypatch.setattr(writer, "write_block", write_until_full)
    assert main(RUN) == 3
    line = _one_error_line(capsys.readouterr().err)
    assert "the disk is full" in line and "run the same command again to continue" in line
    assert not (workdir / STORE / ".claims").exists()  # claims released
    monkeypatch.setattr(writer, "write_block", real)
    assert main(RUN) == 0
    assert "computed 6 points" in capsys.readouterr().out  # the two blocks written before the disk filled stay
    _same_as_reference(workdir / STORE, reference)
