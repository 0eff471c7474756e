"""Adaptive refinement: new points only along the boundary, stored beside the grid, used everywhere."""

from __future__ import annotations

import warnings

import matplotlib.image as mpimg
import numpy as np
import xarray as xr

import sweepshell.query  # noqa: F401  (registers the .sweep accessor)
from sweepshell import open_sweep
from sweepshell.cli.main import main
from sweepshell.engine.refine import node_crossings, refine_store
from sweepshell.models.winkler_column.model import winkler_column_critical
from sweepshell.store.points import read_points

# Closed form of the stable/buckled boundary: load_ratio = min_m (m² + η/m²) (Timoshenko & Gere 1961).


def test_refinement_evaluates_only_near_the_boundary_and_resolves_it(store):
    levels = 3
    summary = refine_store(store, levels=levels)
    assert summary.x_axis == "stiffness_ratio" and summary.y_axis == "load_ratio" and summary.views == 1
    points = read_points(store)
    assert points is not None and points["status"].size == summary.evaluations == sum(summary.per_level)
    assert sorted(set(points["level"].tolist())) == [1, 2, 3]
    # every new point carries the closed-form regime
    pcr = winkler_column_critical(points["stiffness_ratio"])[0]
    np.testing.assert_array_equal(points["regime"], (points["load_ratio"] >= pcr).astype(int))
    # new points stay within one coarse cell of the boundary: |load - P_cr| < one load step, or close in η
    step = 39.5 / 14
    near = np.abs(points["load_ratio"] - pcr) <= step * 1.000001
    assert near.mean() > 0.9
    # cost: far below a uniform grid 2^3 times finer ((19·8+1) x (14·8+1) = 17289 points)
    spent = summary.grid_points + summary.evaluations
    assert spent * 5 < 153 * 113
    # the finest crossings lie within half a fine step of the closed form (edges along the load axis)
    crossings = node_crossings(summary.slices[0], 0, 1)
    fine_step = step / 2 ** levels
    eta, load = 10 ** crossings[:, 0], crossings[:, 1]
    on_load_edges = ~np.isclose(load, np.round((load - 0.5) / fine_step) * fine_step + 0.5, atol=1e-9)
    err = np.abs(load[on_load_edges] - winkler_column_critical(eta[on_load_edges])[0])
    assert on_load_edges.sum() > 50 and np.all(err <= fine_step / 2 * (1 + 1e-9))


def test_more_levels_reuse_the_stored_points_and_the_store_stays_readable(store, capsys):
    first = refine_store(store, levels=2)
    assert main(["refine", str(store), "--levels", "3"]) == 0
    out, err = capsys.readouterr()
    assert out.startswith("refined 1 view(s) of stiffness_ratio x load_ratio by 3 level(s)")
    assert "L1: 0, L2: 0, L3:" in out and f"{first.evaluations} reused" in out
    assert "fewer evaluations than a uniform grid" in err
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        grid = xr.open_zarr(store)
        listed = xr.open_zarr(store, group="points")
    assert list(grid.status.dims) == ["stiffness_ratio", "load_ratio"]
    assert listed.sizes["point"] == read_points(store)["status"].size
    for axis in ("stiffness_ratio", "load_ratio"):  # off-grid axes described like the grid's
        assert listed[axis].attrs["units"] == grid[axis].attrs["units"] == "1"
        assert listed[axis].attrs["long_name"] == grid[axis].attrs["long_name"]
    ds = open_sweep(store)
    table = ds.sweep.query('source == "points" and regime == "buckled"', fields=["critical_load", "source"])
    assert len(table) > 0
    assert np.all(table.load_ratio.to_numpy() >= winkler_column_critical(table.stiffness_ratio.to_numpy())[0])


def test_refined_map_and_boundary_use_the_new_points(store, tmp_path, capsys):
    refine_store(store, levels=3)
    out = tmp_path / "refined.png"
    assert main(["map", str(store), "--x", "stiffness_ratio", "--y", "load_ratio", "--show-points", "--out",
                 str(out)]) == 0
    assert mpimg.imread(str(out)).shape[0] > 600
    from sweepshell.query.boundary import find_boundary

    boundary, _ = find_boundary(open_sweep(store), "stiffness_ratio", "load_ratio", ("stable", "buckled"),
                                bisections=0)
    line = boundary.lines[0]
    along_load = line.along == 1
    # narrowed by the refinement points on the coarse edges: within a fine step (1/8 of the grid step)
    err = np.abs(line.y[along_load] - winkler_column_critical(line.x[along_load])[0])
    assert np.all(err <= 39.5 / 14 / 8 * (1 + 1e-9))


def test_refine_refuses_bad_requests(store, capsys):
    for argv in (["--levels", "0"], ["--levels", "3", "--max-evaluations", "10"], ["--x", "end"]):
        assert main(["refine", str(store), *argv]) == 2, argv
        out, err = capsys.readouterr()
        assert out == "" and err.count("\n") == 1
