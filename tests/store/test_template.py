"""The store template written with zarr alone is the dataset xarray's ``to_zarr(compute=False)`` writes."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import xarray as xr

from sweepshell.config.loader import load_plan
from sweepshell.engine.runner import make_model
from sweepshell.plan import SweepPlan
from sweepshell.store import metadata
from sweepshell.store.writer import plan_attrs, write_template
from tests.conftest import CONFIGS, THREE_AXES, write_sweep

CAP_SWEEP = """\
name: cap_template
model: shallow_cap
fixed: {load: apex_force}
axes:
  shell_parameter: {linspace: [4, 9, 7]}
  edge: [clamped, pinned]
"""


def _xarray_template(folder: Path, plan: SweepPlan, model: Any, block_shape: tuple[int, ...]) -> None:
    """The reference: the same dataset built with xarray and dask and written with ``compute=False``."""
    import dask.array as da
    from zarr.codecs import ZstdCodec

    coords: dict[str, Any] = {}
    for axis in plan.axes:
        param = model.get_parameter(axis.name)
        attrs = {"long_name": param.doc, "spacing": axis.spacing}
        if not param.is_categorical:
            attrs["units"] = param.units
        if param.symbol:
            attrs["symbol"] = param.symbol
        coords[axis.name] = xr.Variable((axis.name,), axis.to_array(), attrs)
    for dim, coord in model.extra_coords().items():
        values = np.asarray(coord)
        coords[dim] = xr.Variable((dim,), values.astype(object) if values.dtype.kind == "U" else values)
    checked = (ZstdCodec(level=3, checksum=True),)
    data_vars, encoding = {}, {}
    for out in model.outputs:
        chunks = block_shape + tuple(model.extra_dims[d] for d in out.dims)
        shape = plan.shape + tuple(model.extra_dims[d] for d in out.dims)
        attrs = {"units": out.units, "long_name": out.doc} | ({"symbol": out.symbol} if out.symbol else {})
        data_vars[out.name] = xr.Variable(plan.axis_names + out.dims,
                                          da.full(shape, np.nan, dtype=out.dtype, chunks=chunks), attrs)
        encoding[out.name] = {"chunks": chunks, "fill_value": np.nan, "compressors": checked}
    for name, dtype, fill, attrs in [(metadata.REGIME_VAR, np.int8, -1, metadata.regime_attrs(model.regimes)),
                                     (metadata.STATUS_VAR, np.uint8, 0, metadata.status_attrs())]:
        data_vars[name] = xr.Variable(plan.axis_names, da.full(plan.shape, fill, dtype=dtype, chunks=block_shape),
                                      attrs)
        encoding[name] = {"chunks": block_shape, "fill_value": fill, "compressors": checked}
    ds = xr.Dataset(data_vars, coords=coords, attrs=plan_attrs(plan, model, block_shape))
    with pytest.warns(UserWarning, match="[Cc]onsolidated"):
        ds.to_zarr(folder, mode="w-", compute=False, zarr_format=3, consolidated=True, encoding=encoding)


def _nodes(folder: Path, coords: list[str]) -> dict[str, Any]:
    """Every metadata document and chunk file of a store (the creation time left out)."""
    out: dict[str, Any] = {}
    for file in sorted(folder.rglob("*")):
        if file.is_file():
            key = str(file.relative_to(folder))
            out[key] = json.loads(file.read_text()) if file.name == metadata.META_FILE else file.read_bytes()
    for doc in (out[metadata.META_FILE]["attributes"],
                out[metadata.META_FILE]["consolidated_metadata"]["metadata"]):
        doc.pop(metadata.ATTR.created, None)
    # the zarr-level fill value of a coordinate is never read (coordinates are written whole and decoded
    # through their _FillValue attribute), and xarray releases differ in it (2025.6 writes 0.0, later NaN)
    consolidated = out[metadata.META_FILE]["consolidated_metadata"]["metadata"]
    for name in coords:
        for doc in (out[f"{name}/{metadata.META_FILE}"], consolidated[name]):
            doc.pop("fill_value", None)
    return out


@pytest.mark.parametrize("sweep_text", [CAP_SWEEP, THREE_AXES], ids=["shallow_cap", "winkler_column"])
def test_template_matches_the_xarray_written_one(tmp_path, sweep_text):
    sweep = write_sweep(tmp_path, sweep_text)
    plan = load_plan(str(sweep), [f"store.path={tmp_path / 'x.zarr'}"], config_dir=str(CONFIGS))
    model = make_model(plan.model, plan.settings)
    block_shape = tuple(min(3, n) for n in plan.shape)
    write_template(tmp_path / "zarr_only.zarr", plan, model, block_shape)
    _xarray_template(tmp_path / "xarray.zarr", plan, model, block_shape)
    coords = [*plan.axis_names, *model.extra_coords()]
    ours, theirs = _nodes(tmp_path / "zarr_only.zarr", coords), _nodes(tmp_path / "xarray.zarr", coords)
    assert sorted(ours) == sorted(theirs)
    for key in theirs:
        assert ours[key] == theirs[key], key

    a = xr.open_zarr(tmp_path / "zarr_only.zarr").drop_attrs()
    b = xr.open_zarr(tmp_path / "xarray.zarr").drop_attrs()
    xr.testing.assert_identical(a, b)
    assert a.sizes == b.sizes and list(a.data_vars) == list(b.data_vars) and list(a.coords) == list(b.coords)
    for name in [*a.data_vars, *a.coords]:
        np.testing.assert_equal(a[name].encoding, b[name].encoding, err_msg=name)  # NaN fill values equal
        assert a[name].dtype == b[name].dtype, name
