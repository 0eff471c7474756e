"""The store contract: what any xarray user (and sweepshell itself) can rely on."""

from __future__ import annotations

import json
import warnings

import numpy as np
import pytest
import xarray as xr

from sweepshell import CAUTION, __version__, open_sweep, run_sweep
from sweepshell.errors import StoreSchemaError
from sweepshell.store import metadata
from tests.conftest import COLUMN_SWEEP, write_sweep


@pytest.fixture
def store(workdir):
    sweep = write_sweep(workdir, COLUMN_SWEEP)
    run_sweep(str(sweep))
    return workdir / "results" / "column.zarr"


def test_plain_xarray_sees_labelled_axes_outputs_ledger_and_provenance(store):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        ds = xr.open_zarr(store)
    assert tuple(ds.status.dims) == ("stiffness_ratio", "load_ratio")
    assert ds.load_path.dims == ("stiffness_ratio", "load_ratio", "path_sample")
    for name in ("stiffness_ratio", "load_ratio"):
        assert ds[name].attrs["units"] and ds[name].attrs["long_name"]
    for name in ("critical_load", "mode_number", "margin", "load_path"):
        assert ds[name].attrs["units"] and ds[name].attrs["long_name"] and ds[name].dtype == np.float64
    assert ds.status.dtype == np.uint8 and ds.regime.dtype == np.int8
    assert ds.status.attrs["flag_values"] == [0, 1, 2, 3, 4, 5]
    assert ds.status.attrs["flag_meanings"].split() == ["pending", "ok", "not_converged", "no_instability",
                                                        "outside_validity", "failed"]
    assert ds.regime.attrs["flag_meanings"].split() == ["none", "stable", "buckled"]
    a = ds.attrs
    assert a["sweepshell_version"] == __version__ and a["sweepshell_schema"] == metadata.SCHEMA_VERSION
    assert a["model"] == "winkler_column" and a["model_version"] == "1.0"
    assert json.loads(a["model_settings_json"])["path_samples"] == 8
    assert json.loads(a["fixed_parameters_json"]) == {"end": "pinned"}
    assert "model: winkler_column" in a["sweep_yaml"] and a["created"].startswith("20")
    assert a["caution"] == CAUTION


def test_unknown_schema_is_refused(store):
    meta = store / "zarr.json"
    doc = json.loads(meta.read_text())
    doc["attributes"]["sweepshell_schema"] = 99
    meta.write_text(json.dumps(doc))
    with pytest.raises(StoreSchemaError, match="schema version 99; this sweepshell reads version 1"):
        open_sweep(store)


def test_a_plain_zarr_group_is_not_a_sweep(workdir):
    import zarr

    zarr.open_group(str(workdir / "plain.zarr"), mode="w", zarr_format=3)
    with pytest.raises(StoreSchemaError, match="not a sweepshell store"):
        open_sweep(workdir / "plain.zarr")


def test_values_and_nan_follow_the_ledger(store):
    ds = open_sweep(store).load()
    trusted = np.isin(ds.status.values, [1, 3])
    assert trusted.all()
    assert np.isfinite(ds.critical_load.values).all()
