"""The contract every registered model keeps (DESIGN.md, model seam)."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest

from sweepshell.models import TRUSTED_STATUSES, Status, get_model, list_models


@pytest.fixture(params=list_models())
def model(request):
    return get_model(request.param)()


def _take(inputs, idx):
    return {k: v[idx] for k, v in inputs.items()}


def test_declarations_are_complete(model):
    assert model.name and model.version and model.regimes
    names = [p.name for p in model.parameters]
    assert len(names) == len(set(names))
    for p in model.parameters:
        assert p.units and p.doc
    for o in model.outputs:
        assert o.units and o.doc and np.dtype(o.dtype).kind == "f"
        assert all(d in model.extra_dims for d in o.dims)
    assert model.cost_hint > 0


def test_shapes_dtypes_status_and_nan_pattern(model):
    inputs = model.sample_inputs()
    n = len(next(iter(inputs.values())))
    assert set(inputs) == {p.name for p in model.parameters}
    result = model.solve_batch(inputs)
    assert result.status.dtype == np.uint8 and result.status.shape == (n,)
    assert result.regime.dtype == np.int8 and result.regime.shape == (n,)
    assert not np.any(result.status == Status.pending)
    trusted = np.isin(result.status, [int(s) for s in TRUSTED_STATUSES])
    assert np.all((result.regime >= 0) == trusted)
    assert np.all(result.regime < len(model.regimes))
    for o in model.outputs:
        values = result.outputs[o.name]
        assert values.dtype == np.dtype(o.dtype)
        assert values.shape == (n, *(model.extra_dims[d] for d in o.dims))
        flat = values.reshape(n, -1)
        assert np.isnan(flat[~trusted]).all(), f"{o.name} has values at untrusted points"
        if not o.nullable:
            ok = result.status == Status.ok
            assert np.isfinite(flat[ok]).all(), f"{o.name} is NaN at points with status ok"


def test_deterministic_and_batch_invariant(model):
    inputs = model.sample_inputs()
    n = len(next(iter(inputs.values())))
    first = model.solve_batch(inputs)
    again = model.solve_batch(inputs)
    order = np.arange(n)[::-1]
    reversed_ = model.solve_batch(_take(inputs, order))
    single = [model.solve_batch(_take(inputs, slice(i, i + 1))) for i in range(n)]
    np.testing.assert_array_equal(first.status, again.status)
    np.testing.assert_array_equal(first.status, reversed_.status[order])
    np.testing.assert_array_equal(first.status, np.concatenate([s.status for s in single]))
    for o in model.outputs:
        a = first.outputs[o.name]
        np.testing.assert_array_equal(a, again.outputs[o.name])
        np.testing.assert_allclose(a, reversed_.outputs[o.name][order], rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(a, np.concatenate([s.outputs[o.name] for s in single]), rtol=1e-9,
                                   atol=1e-12)


def test_describe_is_json_ready(model):
    import json

    d = json.loads(json.dumps(model.describe()))
    assert d["name"] == model.name and len(d["parameters"]) == len(model.parameters)


@pytest.mark.parametrize("name", list_models())
def test_models_import_no_xarray_zarr_dask_or_hydra(name):
    module = f"sweepshell.models.{name}.model"
    code = (f"import sys, {module}; bad = [m for m in ('xarray', 'zarr', 'dask', 'hydra', 'omegaconf') "
            "if m in sys.modules]; print(bad); sys.exit(1 if bad else 0)")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, check=False)
    assert proc.returncode == 0, proc.stdout + proc.stderr
