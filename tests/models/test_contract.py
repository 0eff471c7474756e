"""The contract every registered model keeps (DESIGN.md, model seam)."""

from __future__ import annotations

import subprocess
import sys

import pytest

from sweepshell.models import get_model, list_models
from sweepshell.testing import check_model

#: known contract breaks, each named; strict, so a fix makes the test say so
_KNOWN_BREAKS: dict[str, str] = {}


@pytest.fixture(params=[pytest.param(name, marks=pytest.mark.xfail(reason=_KNOWN_BREAKS[name], strict=True))
                        if name in _KNOWN_BREAKS else name for name in list_models()])
def model(request):
    return get_model(request.param)()


def test_every_registered_model_keeps_the_contract(model):
    # the same suite plug-in authors run (sweepshell.testing.check_model)
    check_model(type(model))


@pytest.mark.parametrize("name", list_models())
def test_models_import_no_xarray_zarr_dask_or_hydra(name):
    module = f"sweepshell.models.{name}.model"
    code = (f"import sys, {module}; bad = [m for m in ('xarray', 'zarr', 'dask', 'hydra', 'omegaconf') "
            "if m in sys.modules]; print(bad); sys.exit(1 if bad else 0)")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, check=False)
    assert proc.returncode == 0, proc.stdout + proc.stderr
