"""Merging stores: the result equals one store computed over the union axes; conflicts are caught."""

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
from sweepshell.errors import StoreMismatchError
from sweepshell.models.base import Status
from sweepshell.store.merge import MergeConflictError, merge_stores, union_axis_values
from sweepshell.store.summary import summarize_store
from tests.conftest import run_column_store

ETA = [0.1, 1.0, 10.0, 100.0, 1000.0]
LOAD = [0.5, 1.0, 5.0, 20.0, 40.0]


@pytest.fixture(scope="module")
def stores(tmp_path_factory) -> dict[str, Path]:
    """A and B overlap at eta=10; B2 lacks the two largest loads; U is the reference over the union."""
    root = tmp_path_factory.mktemp("merge")
    return {
        # B is given in reverse order: the merged axis is sorted all the same
        "a": run_column_store(root / "a.zarr", ETA[:3], LOAD),
        "b": run_column_store(root / "b.zarr", ETA[:1:-1], LOAD),
        "b2": run_column_store(root / "b2.zarr", ETA[2:], LOAD[:3]),
        "u": run_column_store(root / "u.zarr", ETA, LOAD),
    }


def _data(path: Path) -> xr.Dataset:
    ds = open_sweep(path).load()
    return ds[list(ds.data_vars)].drop_attrs()


def test_merge_equals_a_single_store_over_the_union(stores, tmp_path):
    out = tmp_path / "c.zarr"
    report = merge_stores(stores["a"], stores["b"], out)
    assert report.total == 25 and report.pending == 0 and report.conflicts == 0
    assert report.agreeing == 5 and report.from_a == 15 and report.from_b == 10
    merged = open_sweep(out)
    assert merged.stiffness_ratio.values.tolist() == ETA
    xr.testing.assert_identical(_data(out), _data(stores["u"]))
    assert list(merged.sizes) == ["stiffness_ratio", "load_ratio", "path_sample"]
    sources = json.loads(merged.attrs["merged_from_json"])
    assert [s["path"] for s in sources] == [str(stores["a"]), str(stores["b"])]
    assert all(s["created"] and "winkler_column" in s["sweep_yaml"] for s in sources)
    assert json.loads(merged.attrs["axes_json"]) == {"stiffness_ratio": ETA, "load_ratio": LOAD}
    # chunking and codecs as a run would make them: block shape of A, zstd with checksums
    arr = zarr.open_array(str(out / "critical_load"), mode="r")
    assert arr.chunks == (2, 5) and "checksum=True" in repr(arr.compressors)
    info = summarize_store(out)
    assert info["complete"] and info["counts"]["ok"] == int((_data(stores["u"]).status == Status.ok).sum())


def test_points_missing_on_both_sides_are_pending_and_a_run_completes_them(stores, tmp_path):
    out = tmp_path / "c.zarr"
    report = merge_stores(stores["a"], stores["b2"], out)
    assert report.total == 25 and report.pending == 4  # eta 100 and 1000 at loads 20 and 40
    ledger = open_sweep(out).status
    assert (ledger.sel(stiffness_ratio=[100.0, 1000.0], load_ratio=[20.0, 40.0]) == Status.pending).all()
    assert int((ledger == Status.pending).sum()) == 4
    # the merged store is a normal store: running the sweep it records (union axes, store path C) resumes it
    sweep = tmp_path / "c.yaml"
    sweep.write_text(open_sweep(out).attrs["sweep_yaml"])
    summary = run_sweep(str(sweep), ["reuse=false"])
    # blocks are 2 x 5 points: rows (eta) 2-3 and row 4 hold the pending points
    assert summary.complete and summary.computed == 15
    xr.testing.assert_identical(_data(out), _data(stores["u"]))


def test_conflicting_final_values_stop_the_merge_unless_a_side_is_chosen(stores, tmp_path):
    b = tmp_path / "b.zarr"
    shutil.copytree(stores["b"], b)
    tampered = zarr.open_array(str(b / "critical_load"), mode="r+")
    values = tampered[...]
    values[2, 1] *= 1.0 + 1e-6  # eta=10 (shared with A), load=1: beyond round-off
    values[2, 3] *= 1.0 + 1e-13  # round-off only: not a conflict
    tampered[...] = values
    out = tmp_path / "c.zarr"
    with pytest.raises(MergeConflictError) as err:
        merge_stores(stores["a"], b, out)
    message = str(err.value)
    assert "at 1 points" in message and "stiffness_ratio=10, load_ratio=1:" in message
    assert "critical_load" in message and "--prefer" in message
    assert not out.exists() and not list(tmp_path.glob("c.zarr*"))
    report = merge_stores(stores["a"], b, out, prefer="a")
    assert report.conflicts == 1
    xr.testing.assert_identical(_data(out), _data(stores["u"]))
    out_b = tmp_path / "cb.zarr"
    merge_stores(stores["a"], b, out_b, prefer="b")
    merged_b = open_sweep(out_b).critical_load.sel(stiffness_ratio=10.0, load_ratio=1.0).values.item()
    assert merged_b == pytest.approx(values[2, 1], rel=1e-15)
    assert merged_b != open_sweep(stores["u"]).critical_load.sel(stiffness_ratio=10.0, load_ratio=1.0).values.item()


def test_differing_status_at_a_shared_point_is_a_conflict(stores, tmp_path):
    b = tmp_path / "b.zarr"
    shutil.copytree(stores["b"], b)
    status = zarr.open_array(str(b / "status"), mode="r+")
    codes = status[...]
    codes[2, 0] = Status.failed
    status[...] = codes
    with pytest.raises(MergeConflictError, match=r"status no_instability vs failed"):
        merge_stores(stores["a"], b, tmp_path / "c.zarr")


@pytest.mark.parametrize(("key", "value", "what"), [
    ("model_version", "9.9", "model version"),
    ("fixed_parameters_json", '{"end": "weak"}', "fixed parameters"),
    ("model_settings_json", '{"fail_at": null, "path_samples": 4, "validity_limit": 1000000.0, '
                            '"work_seconds": 0.0}', "settings"),
])
def test_other_model_version_settings_or_fixed_parameters_refuse_to_merge(stores, tmp_path, key, value, what):
    b = tmp_path / "b.zarr"
    shutil.copytree(stores["b"], b)
    meta = json.loads((b / "zarr.json").read_text())
    meta["attributes"][key] = value
    (b / "zarr.json").write_text(json.dumps(meta))
    with pytest.raises(StoreMismatchError, match=f"different {what}"):
        merge_stores(stores["a"], b, tmp_path / "c.zarr")
    assert not (tmp_path / "c.zarr").exists()


def test_merge_command_exit_codes_and_existing_output(stores, tmp_path, capsys):
    out = tmp_path / "c.zarr"
    assert main(["merge", str(stores["a"]), str(stores["b2"]), "-o", str(out)]) == 0
    printed = capsys.readouterr().out
    assert "merged 25 points" in printed and "4 pending" in printed
    before = sorted(p.name for p in out.rglob("*"))
    assert main(["merge", str(stores["a"]), str(stores["b"]), "-o", str(out)]) == 2
    assert "exists" in capsys.readouterr().err
    assert sorted(p.name for p in out.rglob("*")) == before
    assert main(["merge", str(stores["a"]), str(tmp_path / "nope.zarr"), "-o", str(tmp_path / "d.zarr")]) == 2
    assert not (tmp_path / "d.zarr").exists()


def test_union_of_axis_values_sorts_numbers_and_absorbs_round_off():
    union, pa, pb = union_axis_values([0.1, 0.7, 0.3], [0.7000000000000001, 0.5])
    assert union == [0.1, 0.3, 0.5, 0.7]
    assert pa.tolist() == [0, 2, -1, 1] and pb.tolist() == [-1, -1, 1, 0]
    union, pa, pb = union_axis_values(["pinned"], ["weak", "pinned"])
    assert union == ["pinned", "weak"] and pa.tolist() == [0, -1] and pb.tolist() == [1, 0]
    with pytest.raises(StoreMismatchError):
        union_axis_values(["pinned"], [1.0])
    assert np.array_equal(union_axis_values([2.0], [1.0])[1], [-1, 0])


def test_run_store_continues_a_merged_store_from_its_recorded_sweep(stores, tmp_path, capsys):
    from sweepshell.cli.main import main

    out = tmp_path / "c.zarr"
    merge_stores(stores["a"], stores["b2"], out)
    # a conflicting override is refused by the dry run, as the run would refuse it
    assert main(["run", str(out), "--dry-run", "fixed.end=weak"]) == 2
    assert "was made with other fixed parameters" in capsys.readouterr().err
    assert main(["run", str(out), "--dry-run"]) == 0
    assert "exists and matches this sweep" in capsys.readouterr().err
    assert main(["run", str(out), "reuse=false", "executor=threads"]) == 0
    assert "-> " + str(out) in capsys.readouterr().out
    xr.testing.assert_identical(_data(out), _data(stores["u"]))


def test_a_recorded_plan_with_unset_optional_parameters_round_trips(tmp_path):
    from sweepshell.config.loader import build_plan

    plan = build_plan({"name": "caps", "model": "shallow_cap", "axes": {"shell_parameter": [4.0, 5.0]},
                       "store": {"path": str(tmp_path / "x.zarr")}})
    import yaml

    recorded = yaml.safe_load(plan.resolved_yaml)
    assert recorded["fixed"]["thickness"] is None  # NaN = not given, written as null
    again = build_plan(recorded)
    assert again.resolved_yaml == plan.resolved_yaml
