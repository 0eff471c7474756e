"""verify: corrupted chunks and ledger/value disagreements are found; repair makes a run recompute them."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import numpy as np
import pytest
import xarray as xr
import zarr

from sweepshell import open_sweep, run_sweep
from sweepshell.cli.main import main
from sweepshell.config.loader import build_plan
from sweepshell.models.base import Status
from sweepshell.store.verify import verify_store
from tests.conftest import run_column_store

ETA = [0.1, 1.0, 10.0, 100.0, 1000.0]
LOAD = [0.5, 1.0, 5.0, 20.0, 40.0]


@pytest.fixture(scope="module")
def clean_store(tmp_path_factory) -> Path:
    return run_column_store(tmp_path_factory.mktemp("verify") / "v.zarr", ETA, LOAD)


@pytest.fixture
def store(clean_store, tmp_path) -> Path:
    path = tmp_path / "v.zarr"
    shutil.copytree(clean_store, path)
    return path


def _flip_byte(chunk: Path) -> None:
    data = bytearray(chunk.read_bytes())
    data[len(data) // 2] ^= 0x10
    chunk.write_bytes(bytes(data))


def test_a_complete_store_is_consistent(store, capsys):
    report = verify_store(store)
    assert report.consistent and report.total == 25 and report.blocks == 3
    assert report.counts["pending"] == 0 and report.counts["ok"] + report.counts["no_instability"] == 25
    assert report.recompute_blocks == () and report.recompute_points == 0
    assert main(["verify", str(store)]) == 0
    assert "consistent" in capsys.readouterr().out


def test_a_flipped_byte_in_an_output_chunk_is_found_and_repair_recomputes_it(store, clean_store, capsys):
    _flip_byte(store / "critical_load" / "c" / "1" / "0")  # block 1: rows (eta) 2-3
    report = verify_store(store)
    assert not report.consistent and len(report.problems) == 1
    problem = report.problems[0]
    assert problem.kind == "chunk" and problem.variable == "critical_load" and problem.block == (1, 0)
    assert "checksum" in problem.message and not problem.recomputed and report.recompute_blocks == ()
    assert main(["verify", str(store), "--json"]) == 1
    info = json.loads(capsys.readouterr().out)
    assert info["consistent"] is False and info["problems"][0]["block"] == [1, 0]
    assert main(["verify", str(store), "--repair"]) == 1
    assert "repaired: 1 blocks" in capsys.readouterr().out
    assert verify_store(store).recompute_blocks == ((1, 0),)
    plan = build_plan({"name": "v", "model": "winkler_column", "fixed": {"end": "pinned"},
                       "axes": {"stiffness_ratio": ETA, "load_ratio": LOAD}, "store": {"path": str(store)},
                       "executor": {"kind": "threads", "workers": 1}, "block": {"points": 10},
                       "reuse": False})
    assert run_sweep(plan).computed == 10
    assert verify_store(store).consistent
    xr.testing.assert_identical(open_sweep(store).load().drop_attrs(), open_sweep(clean_store).load().drop_attrs())


def test_an_unreadable_ledger_chunk_is_a_problem_a_run_recomputes(store):
    _flip_byte(store / "status" / "c" / "2" / "0")
    report = verify_store(store)
    assert [(p.kind, p.variable, p.block, p.recomputed) for p in report.problems] == [
        ("chunk", "status", (2, 0), True)]
    assert report.recompute_blocks == ((2, 0),) and report.recompute_points == 5


def test_status_and_values_that_disagree_are_found(store):
    status = zarr.open_array(str(store / "status"), mode="r+")
    regime = zarr.open_array(str(store / "regime"), mode="r+")
    codes = status[...]
    codes[0, 0] = Status.failed        # but outputs are numbers and the regime is set
    status[0:2, :] = codes[0:2, :]     # whole-chunk write
    labels = regime[...]
    labels[4, 2] = -1                  # trusted status without a regime
    regime[4:5, :] = labels[4:5, :]
    report = verify_store(store)
    found = sorted((p.block, p.variable, p.points) for p in report.problems)
    assert found == [((0, 0), "critical_load", 1), ((0, 0), "load_path", 1), ((0, 0), "margin", 1),
                     ((0, 0), "mode_number", 1), ((0, 0), "regime", 1), ((2, 0), "regime", 1)]
    assert all(p.kind == "ledger" and not p.recomputed for p in report.problems)
    assert report.counts["failed"] == 1


def test_pending_points_with_leftover_values_are_consistent_and_listed_for_recompute(store, capsys):
    status = zarr.open_array(str(store / "status"), mode="r+")
    status[2:4, :] = np.zeros((2, 5), dtype=np.uint8)  # a run killed before writing this block's ledger
    report = verify_store(store)
    assert report.consistent and report.recompute_blocks == ((1, 0),) and report.recompute_points == 10
    assert report.counts["pending"] == 10
    assert main(["verify", str(store)]) == 0
    assert "a run would recompute 1 blocks (10 points): [1, 0]" in capsys.readouterr().out


def test_broken_metadata_and_attributes_are_problems_not_crashes(store):
    meta = json.loads((store / "zarr.json").read_text())
    meta["attributes"]["axes_json"] = "{not json"
    meta["attributes"]["block_shape"] = [2, 0]
    (store / "zarr.json").write_text(json.dumps(meta))
    (store / "margin" / "zarr.json").write_text("{truncated")
    report = verify_store(store)
    kinds = sorted(p.kind for p in report.problems)
    assert kinds == ["attribute", "attribute", "metadata"]
    assert any("margin/zarr.json" in p.message for p in report.problems)


def test_bad_input_exits_2(tmp_path, capsys):
    assert main(["verify", str(tmp_path / "missing.zarr")]) == 2
    (tmp_path / "plain.zarr").mkdir()
    (tmp_path / "plain.zarr" / "zarr.json").write_text('{"zarr_format": 3, "node_type": "group", "attributes": {}}')
    assert main(["verify", str(tmp_path / "plain.zarr")]) == 2
    assert "not a sweepshell store" in capsys.readouterr().err


def test_the_off_grid_point_list_is_checked_too(store):
    from sweepshell.store.points import append_points

    def append(status: int, critical_load: float, regime: int) -> None:
        append_points(store, {"stiffness_ratio": np.array([3.0]), "load_ratio": np.array([2.0])},
                      {"critical_load": np.array([critical_load]), "margin": np.array([np.nan]),
                       "mode_number": np.array([np.nan])},
                      np.array([regime], dtype=np.int8), np.array([status], dtype=np.uint8), origin="refine")

    append(Status.ok, 4.0, 1)
    append(Status.failed, np.nan, -1)
    assert verify_store(store).consistent
    append(Status.failed, 5.0, -1)  # a failed point with a value
    append(Status.ok, 4.0, -1)  # a trusted point without a regime
    problems = verify_store(store).problems
    assert sorted((p.variable, p.points) for p in problems) == [("points/critical_load", 1), ("points/regime", 1)]
    assert all(p.kind == "ledger" and "point list" in p.message for p in problems)
