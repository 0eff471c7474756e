"""Reuse: points already computed in a compatible store beside the new one are copied, never recomputed."""

from __future__ import annotations

import numpy as np
import xarray as xr

from sweepshell import open_sweep, run_sweep
from tests.conftest import COLUMN_SWEEP, write_sweep


def test_overlapping_points_are_copied_and_equal_a_fresh_computation(workdir):
    sweep = write_sweep(workdir, COLUMN_SWEEP)
    first = run_sweep(str(sweep), ["axes.load_ratio=[1.0,2.0,5.0]"])
    assert first.reused == 0
    # a wider sweep in another store: 20 x 3 of its 20 x 5 points exist already
    wider = ["axes.load_ratio=[0.5,1.0,2.0,5.0,9.0]", "store.path=results/wider.zarr"]
    second = run_sweep(str(sweep), wider)
    assert second.complete and second.reused == 60 and second.computed == 100
    fresh = run_sweep(str(sweep), [*wider[:1], "store.path=elsewhere/fresh.zarr", "reuse=false"])
    assert fresh.reused == 0
    got = open_sweep(workdir / "results" / "wider.zarr").load()
    want = open_sweep(workdir / "elsewhere" / "fresh.zarr").load()
    xr.testing.assert_identical(got.drop_attrs(), want.drop_attrs())


def test_other_settings_or_fixed_values_are_never_reused(workdir):
    sweep = write_sweep(workdir, COLUMN_SWEEP)
    run_sweep(str(sweep))
    other_settings = run_sweep(str(sweep), ["settings.path_samples=4", "store.path=results/b.zarr"])
    assert other_settings.reused == 0
    other_fixed = run_sweep(str(sweep), ["fixed.end=weak", "store.path=results/c.zarr"])
    assert other_fixed.reused == 0
    weak = open_sweep(workdir / "results" / "c.zarr").critical_load.values
    pinned = open_sweep(workdir / "results" / "column.zarr").critical_load.values
    np.testing.assert_allclose(weak, 0.5 * pinned)


def test_fixed_value_matching_a_donor_axis_value_is_reused(workdir):
    sweep = write_sweep(workdir, COLUMN_SWEEP)
    run_sweep(str(sweep), ["+axes.end=[pinned,weak]", "~fixed.end", "store.path=results/both.zarr"])
    only_weak = run_sweep(str(sweep), ["fixed.end=weak", "store.path=results/weak.zarr"])
    assert only_weak.reused == only_weak.total == 300
    both = open_sweep(workdir / "results" / "both.zarr").sel(end="weak").load()
    weak = open_sweep(workdir / "results" / "weak.zarr").load()
    np.testing.assert_array_equal(both.critical_load.values, weak.critical_load.values)
    np.testing.assert_array_equal(both.load_path.values, weak.load_path.values)
