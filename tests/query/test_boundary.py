"""Boundaries: traced on the grid, located below the spacing by bisection, recorded in the store."""

from __future__ import annotations

import csv
import io
import json
import warnings

import numpy as np
import xarray as xr

import sweepshell.query  # noqa: F401  (registers the .sweep accessor)
from sweepshell import open_sweep
from sweepshell.cli.main import main
from sweepshell.engine.evaluate import store_evaluator
from sweepshell.models.winkler_column.model import WinklerColumnModel, winkler_column_critical
from sweepshell.query.boundary import find_boundary
from sweepshell.store.points import read_points
from tests.conftest import THREE_AXES, compute_column_store

# The stable/buckled boundary of the column is load_ratio = P_cr(η) L²/(π²B) = min_m (m² + η/m²)
# (Timoshenko & Gere 1961, pinned beam on a Winkler foundation), increasing in η.


def exact(eta):
    return winkler_column_critical(np.asarray(eta, float))[0]


def check_vertices(boundary, load_step, eta_log_step, k):
    """Every vertex is within the bracket expected from k halvings of its grid edge."""
    for line in boundary.lines:
        along_load = line.along == 1
        # a bracket along the load axis: the vertex is within step / 2^(k+1) of the closed form
        err = np.abs(line.y[along_load] - exact(line.x[along_load]))
        assert np.all(err <= load_step / 2 ** (k + 1) * (1 + 1e-9)), err.max()
        # a bracket along η: the closed-form crossing lies inside it, and it is 1/2^k of a log step wide
        lo, hi = line.low[~along_load], line.high[~along_load]
        y = line.y[~along_load]
        assert np.all((exact(lo) - y) * (exact(hi) - y) <= 1e-12)
        assert np.all(np.log10(hi / lo) <= eta_log_step / 2 ** k * (1 + 1e-9))


def test_grid_boundary_is_within_half_a_spacing_and_costs_nothing(store):
    ds = open_sweep(store)
    boundary, view = find_boundary(ds, "stiffness_ratio", "load_ratio", ("stable", "buckled"), bisections=0)
    assert boundary.evaluations == 0 and len(boundary.lines) == 1 and boundary.n_vertices > 20
    load_step = float(np.diff(ds.load_ratio.values)[0])
    check_vertices(boundary, load_step, 4 / 19, 0)
    assert view.log == (True, False)


def test_without_an_evaluator_the_query_layer_neither_evaluates_nor_writes(store):
    boundary, _ = find_boundary(open_sweep(store), "stiffness_ratio", "load_ratio", ("stable", "buckled"),
                                bisections=5)
    assert boundary.evaluations == 0 and boundary.bisections == 0
    assert read_points(store) is None


def test_bisection_narrows_each_crossing_and_records_its_points(store):
    ds = open_sweep(store)
    k = 7
    boundary, _ = find_boundary(ds, "stiffness_ratio", "load_ratio", ("stable", "buckled"), bisections=k,
                                evaluator=store_evaluator(ds, record=True))
    load_step = float(np.diff(ds.load_ratio.values)[0])
    check_vertices(boundary, load_step, 4 / 19, k)
    assert boundary.evaluations == k * boundary.n_vertices
    points = read_points(store)
    assert points is not None and points["status"].size == boundary.evaluations
    assert set(np.unique(points["origin"])) == {1}  # "boundary"
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        grid = xr.open_zarr(store)
        listed = xr.open_zarr(store, group="points")
    assert "point" not in grid.dims and listed.sizes["point"] == boundary.evaluations
    assert list(open_sweep(store).status.dims) == ["stiffness_ratio", "load_ratio"]
    # the stored points alone now give the same boundary without new evaluations
    again, _ = find_boundary(open_sweep(store), "stiffness_ratio", "load_ratio", ("stable", "buckled"), bisections=0)
    assert again.evaluations == 0
    np.testing.assert_allclose(again.lines[0].y, boundary.lines[0].y, rtol=0, atol=1e-12)
    # and queries see them as points evaluated off the grid
    table = open_sweep(store).sweep.query('source == "points"', fields=["regime", "source"])
    assert len(table) == boundary.evaluations


def test_cli_csv_and_json_name_the_axes(store, capsys):
    assert main(["boundary", str(store), "--between", "stable", "buckled", "--bisections", "3"]) == 0
    out, err = capsys.readouterr()
    rows = list(csv.DictReader(io.StringIO(out)))
    assert list(rows[0]) == ["line", "stiffness_ratio", "load_ratio", "bracket_axis", "bracket_low", "bracket_high"]
    assert "model evaluations" in err
    assert main(["boundary", str(store), "--between", "stable", "buckled", "--bisections", "0", "--format",
                 "json", "--x", "stiffness_ratio", "--y", "load_ratio"]) == 0
    record = json.loads(capsys.readouterr().out)
    assert record["x_axis"] == "stiffness_ratio" and record["between"] == ["stable", "buckled"]
    assert record["model"] == "winkler_column" and record["model_evaluations"] == 0
    ys = np.asarray(record["lines"][0]["load_ratio"])
    assert len(ys) == len(rows)


def test_bad_requests_and_other_model_versions_are_refused(store, capsys, monkeypatch):
    for argv in (["--between", "stable", "wrinkled"], ["--between", "stable", "stable"],
                 ["--between", "stable", "buckled", "--x", "nope"], ["--between", "stable", "buckled",
                                                                      "--bisections", "99"]):
        code = main(["boundary", str(store), *argv])
        out, err = capsys.readouterr()
        assert code == 2 and out == "" and err.count("\n") == 1, argv
    monkeypatch.setattr(WinklerColumnModel, "version", "9.9")
    assert main(["boundary", str(store), "--between", "stable", "buckled"]) == 2
    assert "winkler_column 1.0" in capsys.readouterr().err
    assert read_points(store) is None



def test_boundary_on_a_view_with_a_named_axis_fixed(tmp_path):
    store = compute_column_store(tmp_path, "column3", sweep_text=THREE_AXES)
    ds = open_sweep(store)
    boundary, view = find_boundary(ds, "stiffness_ratio", "load_ratio", ("stable", "buckled"),
                                   at={"end": "weak"}, bisections=8, evaluator=store_evaluator(ds, record=True))
    assert view.fixed_values == {"end": "weak"}
    line = boundary.lines[0]
    along_load = line.along == 1
    # the made-up 'weak' end halves the critical load of the pinned column
    err = np.abs(line.y[along_load] - 0.5 * exact(line.x[along_load]))
    assert along_load.sum() > 3 and np.all(err <= 3.95 / 2 ** 9 * (1 + 1e-9))
    points = read_points(store)
    assert set(points["end"].tolist()) == {"weak"}
    table = open_sweep(store).sweep.query('source == "points" and end == "weak"', fields=["critical_load"])
    assert len(table) == boundary.evaluations
    np.testing.assert_allclose(table.critical_load, 0.5 * exact(table.stiffness_ratio))


def test_pending_points_are_left_out_and_drawn_as_not_computed(store, capsys):
    import zarr

    group = zarr.open_group(str(store), mode="r+")
    group["status"][:2, :] = 0  # two rows never computed (a run stopped early)
    ds = open_sweep(store)
    assert len(ds.sweep.query(all_points=True)) == 300 - 30
    from sweepshell.plot.regime_map import draw_regime_map

    fig = draw_regime_map(ds, "stiffness_ratio", "load_ratio").figure
    labels = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert "not computed yet" in labels
