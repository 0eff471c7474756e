"""The Python API: ``run_sweep`` on the caller's dask client, ``open_sweep(chunks=...)`` and the ``.sweep``
accessor registered by ``import sweepshell`` (summary, query, trusted, map into given axes, boundary)."""

from __future__ import annotations

import io
import subprocess
import sys

import numpy as np
import pytest

from sweepshell import open_sweep, run_sweep
from sweepshell.engine.executors import dashboard_link
from sweepshell.engine.observers import LineObserver
from sweepshell.testing import winkler_column_critical
from tests.conftest import COLUMN_SWEEP, write_sweep


@pytest.fixture(scope="module")
def client():
    from distributed import Client, LocalCluster

    cluster = LocalCluster(n_workers=1, threads_per_worker=2, processes=False, dashboard_address=":0")
    with Client(cluster) as c:
        yield c
    cluster.close()


@pytest.fixture
def store(workdir, client):
    summary = run_sweep(str(write_sweep(workdir, COLUMN_SWEEP)), client=client)
    assert summary.complete and summary.computed == 300
    assert client.status == "running"  # the caller's client is used, not closed
    return workdir / "results" / "column.zarr"


def test_run_sweep_on_an_existing_client_and_its_dashboard(store, client):
    link = dashboard_link(client)  # served by the scheduler; its plots need bokeh (the `distributed` extra)
    assert link is not None and link.startswith("http") and link.endswith("/status")
    stream = io.StringIO()
    LineObserver(stream).connected("http://127.0.0.1:8787/status")
    assert stream.getvalue() == "dask dashboard: http://127.0.0.1:8787/status\n"


def test_import_sweepshell_registers_the_accessor_without_loading_xarray():
    code = ("import sys, sweepshell; assert 'xarray' not in sys.modules; import xarray as xr; "
            "print(hasattr(xr.Dataset, 'sweep'))")
    first = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, check=False)
    assert first.stdout.strip() == "True", first.stderr
    code = "import xarray as xr, sweepshell; print(hasattr(xr.Dataset, 'sweep'))"
    second = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, check=False)
    assert second.stdout.strip() == "True", second.stderr


def test_accessor_summary_query_trusted_map_and_boundary(store):
    import matplotlib.pyplot as plt

    ds = open_sweep(store)
    text = repr(ds.sweep)
    assert text.splitlines()[0] == "sweep column: model winkler_column 1.0"
    assert "300 points over stiffness_ratio[20] x load_ratio[15]" in text
    n_buckled = int((ds.regime.values == 1).sum())
    assert f"{n_buckled} buckled" in text and n_buckled > 0
    assert int(ds.sweep.trusted.sum()) == 300
    table = ds.sweep.query('regime == "buckled"', ["critical_load"])
    assert len(table) == n_buckled

    fig, (left, right) = plt.subplots(1, 2, figsize=(9, 4))
    assert ds.sweep.map(ax=left) is left
    assert ds.sweep.map("stiffness_ratio", "load_ratio", ax=right, color="critical_load") is right
    assert left.get_xscale() == "log" and left.get_xlabel().startswith("stiffness")
    assert left.collections or left.images
    plt.close(fig)

    edge = ds.sweep.boundary()
    assert list(edge.columns) == ["line", "stiffness_ratio", "load_ratio", "bracket_axis", "bracket_low",
                                  "bracket_high"]
    assert len(edge) > 5
    # each vertex brackets the closed-form critical load (Timoshenko & Gere 1961, Sec. 2.10) along its axis
    on_load = edge[edge.bracket_axis == "load_ratio"]
    pcr = winkler_column_critical(on_load.stiffness_ratio.to_numpy())[0]
    assert np.all((on_load.bracket_low.to_numpy() <= pcr) & (pcr <= on_load.bracket_high.to_numpy()))


def test_open_sweep_chunks(store):
    blocks = open_sweep(store, chunks={})
    assert blocks.status.chunks is not None
    plain = open_sweep(store, chunks=None)
    assert plain.status.chunks is None
    np.testing.assert_array_equal(plain.status.values, blocks.status.values)
