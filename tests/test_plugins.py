"""The plug-in seam: an installed distribution's entry point in ``sweepshell.models`` is listed, swept, recorded
in the store's provenance and refused cleanly once uninstalled.

The example plug-in (``examples/elastic_ring_plugin``, distribution ``fenwick-rings``) is installed with
``pip install --target`` into a folder that subprocesses put on ``PYTHONPATH``; leaving the folder off is
uninstalling it.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from sweepshell.errors import UnknownModelError
from sweepshell.models import get_model, list_models
from tests.conftest import subprocess_env

RING_SWEEP = """\
name: liners
model: elastic_ring
fixed: {radius: 0.5, youngs_modulus: 1.0e9, poisson_ratio: 0.45}
axes:
  thickness: [0.005, 0.01, 0.02]
  foundation_modulus: [0.0, 1.0e5, 1.0e6]
  pressure: [1000.0, 20000.0]
executor: {kind: threads, workers: 1}
"""


def _sweepshell(args: list[str], cwd: Path, *paths: Path) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "sweepshell", *args], cwd=cwd, env=subprocess_env(*paths),
                          capture_output=True, text=True, timeout=300, check=False)


@pytest.mark.slow  # builds and installs a package, runs several subprocesses
def test_installed_plugin_is_listed_swept_recorded_and_refused_when_gone(ring_plugin_site, tmp_path):
    listed = _sweepshell(["models"], tmp_path, ring_plugin_site)
    assert listed.returncode == 0, listed.stderr
    assert "elastic_ring 1.0 (fenwick-rings 1.0.0): thin ring" in listed.stdout
    assert "shallow_cap" in listed.stdout and "(built-in)" in listed.stdout
    described = json.loads(_sweepshell(["models", "--json"], tmp_path, ring_plugin_site).stdout)
    origin = {d["name"]: d["origin"] for d in described}
    assert origin["elastic_ring"] == {"builtin": False, "distribution": "fenwick-rings", "version": "1.0.0",
                                      "label": "fenwick-rings 1.0.0"}
    assert origin["winkler_column"]["builtin"] is True

    (tmp_path / "liners.yaml").write_text(RING_SWEEP)
    run = _sweepshell(["run", "liners.yaml", "--progress", "none"], tmp_path, ring_plugin_site)
    assert run.returncode == 0, run.stderr
    store = tmp_path / "results" / "liners.zarr"
    attrs = json.loads((store / "zarr.json").read_text())["attributes"]
    assert (attrs["model"], attrs["model_package"], attrs["model_package_version"]) == \
        ("elastic_ring", "fenwick-rings", "1.0.0")

    import xarray as xr

    ds = xr.open_zarr(store, consolidated=True)
    # long tube without foundation: p_cr = E/(4(1-nu^2)) (t/R)^3 (Bryan 1888; Timoshenko & Gere 1961, Sec. 7.4)
    expected = 1.0e9 / (4 * (1 - 0.45**2)) * (0.01 / 0.5) ** 3
    got = float(ds.critical_pressure.sel(thickness=0.01, foundation_modulus=0.0, pressure=1000.0))
    assert got == pytest.approx(expected, rel=1e-12) and expected == pytest.approx(2507.837, rel=1e-6)
    assert int(ds.status.sel(thickness=0.01, foundation_modulus=0.0, pressure=1000.0)) == 3  # no_instability
    assert int(ds.regime.sel(thickness=0.01, foundation_modulus=0.0, pressure=20000.0)) == 1  # buckled

    # uninstalled: the old store still opens and reports; running names the missing package, one line, exit 2
    status = _sweepshell(["status", str(store)], tmp_path)
    assert status.returncode == 0, status.stderr
    assert "model elastic_ring 1.0 from fenwick-rings 1.0.0" in status.stdout
    opened = subprocess.run([sys.executable, "-c", f"import sweepshell; ds = sweepshell.open_sweep({str(store)!r}); "
                             "print(len(ds.sweep.query('regime == \"buckled\"')))"],
                            env=subprocess_env(), capture_output=True, text=True, timeout=300, check=False)
    assert opened.returncode == 0 and int(opened.stdout) > 0, opened.stderr
    again = _sweepshell(["run", "liners.yaml", "--progress", "none"], tmp_path)
    assert again.returncode == 2
    assert again.stderr.count("\n") == 1 and "Traceback" not in again.stderr
    assert "'fenwick-rings'" in again.stderr and "not installed" in again.stderr and "pip install" in again.stderr


@pytest.mark.slow
def test_installed_plugin_keeps_the_contract(ring_plugin_site, tmp_path):
    code = ("from sweepshell.models import get_model; from sweepshell.testing import check_model; "
            "cls = get_model('elastic_ring'); check_model(cls); print(cls.__module__)")
    proc = subprocess.run([sys.executable, "-c", code], env=subprocess_env(ring_plugin_site), cwd=tmp_path,
                          capture_output=True, text=True, timeout=300, check=False)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == "fenwick_rings.model"


def test_only_registered_names_are_imported():
    # a config or store naming an importable module path gets nothing imported: names are looked up, not imported
    for name in ("fenwick_rings.model:ElasticRingModel", "os", "sweepshell.testing:WinklerColumnModel",
                 "elastic_ring"):
        with pytest.raises(UnknownModelError, match="not a registered model"):
            get_model(name)
    assert "fenwick_rings" not in sys.modules
    assert "elastic_ring" not in list_models()
