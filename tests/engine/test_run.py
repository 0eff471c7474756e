"""End-to-end runs through config, engine and store with the cheap analytic model."""

from __future__ import annotations

import json
import warnings

import numpy as np
import pytest
import xarray as xr

from sweepshell import open_sweep, run_sweep
from sweepshell.cli.main import main
from sweepshell.config.loader import load_plan
from sweepshell.models.base import Status
from sweepshell.models.winkler_column.model import winkler_column_critical
from sweepshell.plan import choose_block_shape, iter_blocks
from tests.conftest import COLUMN_SWEEP, write_sweep


def test_run_fills_every_point_with_the_closed_form(workdir):
    sweep = write_sweep(workdir, COLUMN_SWEEP)
    summary = run_sweep(str(sweep))
    assert summary.complete and summary.computed == 300 and summary.total == 300
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        ds = xr.open_zarr(workdir / "results" / "column.zarr")
    assert list(ds.sizes) == ["stiffness_ratio", "load_ratio", "path_sample"]
    assert set(np.unique(ds.status.values)) <= {Status.ok, Status.no_instability}
    eta = ds.stiffness_ratio.values
    expected, _ = winkler_column_critical(eta)
    np.testing.assert_allclose(ds.critical_load.isel(load_ratio=0).values, expected, rtol=1e-12)
    assert ds.critical_load.attrs["units"] == "1" and ds.stiffness_ratio.attrs["spacing"] == "log"
    assert ds.attrs["model"] == "winkler_column" and "Caution" in ds.attrs["caution"]
    assert json.loads(ds.attrs["fixed_parameters_json"]) == {"end": "pinned"}
    assert "load_ratio" in ds.attrs["sweep_yaml"]
    # regime is consistent with the status
    buckled = ds.regime.values == 1
    assert np.array_equal(buckled, ds.status.values == Status.ok)


def test_second_run_computes_nothing_and_says_so(workdir, capsys):
    sweep = write_sweep(workdir, COLUMN_SWEEP)
    assert main(["run", str(sweep), "--progress", "none"]) == 0
    assert main(["run", str(sweep), "--progress", "none"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0].startswith("computed 300 points")
    assert out[1].startswith("nothing to compute, store already complete: 300 points")


def test_resume_recomputes_only_unfinished_blocks(workdir):
    sweep = write_sweep(workdir, COLUMN_SWEEP)
    run_sweep(str(sweep))
    path = workdir / "results" / "column.zarr"
    reference = open_sweep(path).load()
    import zarr

    group = zarr.open_group(str(path), mode="r+")
    group["status"][3:6, :] = 0          # two blocks of 2 x 15 points... and a third partly
    group["critical_load"][3:6, :] = -1.0  # garbage left by a killed writer
    summary = run_sweep(str(sweep))
    assert summary.computed == 60  # blocks are 2 rows x 15 = 30 points; rows 3..5 touch blocks 1 and 2
    xr.testing.assert_identical(open_sweep(path).load().drop_attrs(), reference.drop_attrs())


def test_status_json_has_the_contract_fields(workdir, capsys):
    sweep = write_sweep(workdir, COLUMN_SWEEP)
    run_sweep(str(sweep))
    assert main(["status", "results/column.zarr", "--json"]) == 0
    info = json.loads(capsys.readouterr().out)
    assert info["model"] == "winkler_column" and info["model_version"] == "1.0"
    assert info["total"] == 300 and info["counts"]["pending"] == 0
    assert sum(info["counts"].values()) == 300 and info["complete"] is True


def test_hydra_sweep_forms_and_preset_selection(workdir):
    sweep = write_sweep(workdir, COLUMN_SWEEP)
    plan = load_plan(str(sweep), ["axes.load_ratio=range(1,3,0.5)", "+axes.end=pinned,weak", "~fixed.end",
                                  "executor=local", "executor.workers=1", "store.path=scratch/x.zarr"])
    assert plan.axes[1].values == (1.0, 1.5, 2.0, 2.5)
    assert plan.axes[2].values == ("pinned", "weak")
    assert plan.executor.kind == "local" and plan.executor.workers == 1
    assert plan.store_path == "scratch/x.zarr"
    assert plan.fixed == {}


def test_blocks_tile_the_grid_exactly():
    shape = (7, 5, 3)
    block = choose_block_shape(shape, 10)
    assert block == (1, 3, 3)
    covered = np.zeros(shape, dtype=int)
    for b in iter_blocks(shape, block):
        covered[b.slices] += 1
    assert np.all(covered == 1)


def test_failed_and_outside_validity_points_are_recorded_not_raised(workdir):
    sweep = write_sweep(workdir, COLUMN_SWEEP)
    summary = run_sweep(str(sweep), ["+settings.fail_at=0.5", "settings.validity_limit=500"])
    assert summary.complete
    ds = open_sweep(workdir / "results" / "column.zarr").load()
    failed = ds.status.values == Status.failed
    outside = ds.status.values == Status.outside_validity
    assert failed[:, 0].all() and outside.any()
    bad = failed | outside
    assert np.isnan(ds.critical_load.values[bad]).all() and (ds.regime.values[bad] == -1).all()


def test_model_that_raises_marks_points_failed(workdir, monkeypatch):
    from sweepshell.models.winkler_column import model as testing

    original = testing.WinklerColumnModel.solve_batch

    def flaky(self, inputs):
        if np.any(inputs["stiffness_ratio"] > 500):
            raise FloatingPointError("simulated bug")
        return original(self, inputs)

    monkeypatch.setattr(testing.WinklerColumnModel, "solve_batch", flaky)
    sweep = write_sweep(workdir, COLUMN_SWEEP)
    summary = run_sweep(str(sweep))
    assert summary.complete
    ds = open_sweep(workdir / "results" / "column.zarr")
    eta = ds.stiffness_ratio.values
    status = ds.status.values
    assert (status[eta > 500] == Status.failed).all()
    assert (status[eta < 500] != Status.failed).all()


@pytest.mark.slow
def test_local_worker_processes_match_in_process(workdir):
    sweep = write_sweep(workdir, COLUMN_SWEEP)
    run_sweep(str(sweep), ["executor=local", "executor.workers=2", "store.path=results/a.zarr"])
    run_sweep(str(sweep), ["store.path=results/b.zarr"])
    a = open_sweep(workdir / "results" / "a.zarr").load()
    b = open_sweep(workdir / "results" / "b.zarr").load()
    xr.testing.assert_identical(a.drop_attrs(), b.drop_attrs())


def test_finished_store_lists_cleanly_without_consolidated_metadata(workdir):
    import zarr

    sweep = write_sweep(workdir, COLUMN_SWEEP)
    run_sweep(str(sweep))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        group = zarr.open_group(str(workdir / "results" / "column.zarr"), mode="r", use_consolidated=False)
        assert "status" in set(group.array_keys())
        ds = xr.open_zarr(workdir / "results" / "column.zarr", consolidated=False)
    assert ds.status.dtype == np.uint8


def test_sweep_option_refine_adds_points_along_the_boundary(workdir, capsys):
    sweep = write_sweep(workdir, COLUMN_SWEEP + "refine: {levels: 2}\n")
    assert main(["run", str(sweep), "--progress", "none"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0].startswith("computed 300 points") and out[1].startswith("refined 1 view(s) of stiffness_ratio x")
    from sweepshell.query.table import read_store_points

    points = read_store_points(open_sweep(workdir / "results" / "column.zarr"))
    assert points is not None and len(next(iter(points.values()))) > 0


def test_refine_option_is_validated(workdir, capsys):
    sweep = write_sweep(workdir, COLUMN_SWEEP + "refine: {levels: 2, x: thickness}\n")
    assert main(["run", str(sweep)]) == 2
    assert "refine.x='thickness' is not an axis of this sweep" in capsys.readouterr().err
