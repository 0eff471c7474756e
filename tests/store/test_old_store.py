"""A store written by an earlier sweepshell still opens: status, query, map, verify and plain xarray read it.

``tests/data/column_schema1.zarr`` is a small ``winkler_column`` sweep (24 grid points of every
status, 26 off-grid points from one refinement level) written by sweepshell 0.1.0, store schema
version 1, with :func:`write_fixture`. It is committed and never rewritten: a change of the store
layout must keep reading it, or bump ``SCHEMA_VERSION`` (then readers refuse it with one line,
as the last test checks on a copy) and add a new fixture beside this one.
"""

from __future__ import annotations

import io
import json
import shutil
from pathlib import Path

import matplotlib.image as mpimg
import numpy as np
import pytest

from sweepshell.cli.main import main
from sweepshell.store import metadata
from sweepshell.store.metadata import ATTR
from sweepshell.testing import winkler_column_critical

FIXTURE = Path(__file__).resolve().parents[1] / "data" / "column_schema1.zarr"


def write_fixture(folder: Path) -> Path:
    """Write the fixture store into ``folder`` (run there: the sweep records the store path as given)."""
    import os

    from sweepshell import run_sweep
    from sweepshell.config.loader import build_plan

    here = Path.cwd()
    os.chdir(folder)
    try:
        plan = build_plan({"name": "column_schema1", "model": "winkler_column",
                           "settings": {"fail_at": 0.5, "validity_limit": 500},
                           "axes": {"stiffness_ratio": [1.0, 10.0, 100.0, 1000.0], "load_ratio": [0.5, 5.0, 20.0],
                                    "end": ["pinned", "weak"]},
                           "store": {"path": FIXTURE.name}, "executor": {"kind": "threads", "workers": 1},
                           "block": {"points": 8}, "reuse": False})
        run_sweep(plan)
        assert main(["refine", FIXTURE.name, "--levels", "1"]) == 0
    finally:
        os.chdir(here)
    return folder / FIXTURE.name


def _snapshot(root: Path) -> dict[str, tuple[int, int]]:
    return {p.relative_to(root).as_posix(): (p.stat().st_size, p.stat().st_mtime_ns) for p in root.rglob("*")}


@pytest.fixture(scope="module", autouse=True)
def _fixture_left_untouched():
    before = _snapshot(FIXTURE)
    yield
    assert _snapshot(FIXTURE) == before, "reading the old store wrote into it"


def test_the_store_records_schema_version_1_and_the_reader_accepts_it():
    from sweepshell.store.reader import check_readable_store

    attrs = metadata.read_node(FIXTURE)["attributes"]
    assert attrs[ATTR.schema] == 1 == metadata.SCHEMA_VERSION
    assert check_readable_store(FIXTURE, chunks=True)[ATTR.model] == "winkler_column"


def test_status_counts_every_point(capsys):
    assert main(["status", str(FIXTURE), "--json"]) == 0
    info = json.loads(capsys.readouterr().out)
    assert info["total"] == 24 and info["complete"]
    # load_ratio 0.5 fails (fail_at), eta = 1000 lies past validity_limit = 500, the rest are trusted
    assert {k: v for k, v in info["counts"].items() if v} == {"ok": 8, "no_instability": 4, "outside_validity": 4,
                                                              "failed": 8}
    assert sum(info["off_grid_points"].values()) == 26


def test_query_returns_the_stored_values_on_and_off_the_grid(capsys):
    assert main(["query", str(FIXTURE), "--fields", "critical_load,mode_number", "--format", "json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert len(rows) == 12 + 23  # trusted grid points and trusted off-grid points
    eta = np.array([r["stiffness_ratio"] for r in rows])
    weak = np.array([r["end"] == "weak" for r in rows])
    # P_cr/P_E = min over m of m² + η/m² (Timoshenko & Gere 1961, §2.10), halved for the weak end (test model)
    expected, modes = winkler_column_critical(eta)
    np.testing.assert_allclose([r["critical_load"] for r in rows], np.where(weak, 0.5, 1.0) * expected, rtol=1e-12)
    np.testing.assert_array_equal([r["mode_number"] for r in rows], modes)


def test_map_and_verify_read_it(tmp_path, capsys):
    out = tmp_path / "map.png"
    assert main(["map", str(FIXTURE), "--x", "stiffness_ratio", "--y", "load_ratio", "--at", "end=pinned",
                 "--show-points", "--out", str(out)]) == 0
    image = mpimg.imread(io.BytesIO(out.read_bytes()))
    assert image.shape[0] > 400 and np.std(image[..., :3]) > 0.05
    assert main(["verify", str(FIXTURE)]) == 0
    assert "consistent" in capsys.readouterr().out


def test_plain_xarray_opens_it():
    import xarray as xr

    ds = xr.open_zarr(FIXTURE, zarr_format=3)
    assert dict(ds.sizes) == {"stiffness_ratio": 4, "load_ratio": 3, "end": 2, "path_sample": 8}
    assert float(ds["critical_load"].sel(stiffness_ratio=10.0, load_ratio=5.0, end="pinned").values) == 6.5


def test_a_store_of_another_schema_version_is_refused_in_one_line(tmp_path, capsys):
    copy = tmp_path / FIXTURE.name
    shutil.copytree(FIXTURE, copy)
    node = json.loads((copy / metadata.META_FILE).read_text())
    node["attributes"][ATTR.schema] = 2
    for entry in node.get("consolidated_metadata", {}).get("metadata", {}).values():
        entry.get("attributes", {}).pop(ATTR.schema, None)
    (copy / metadata.META_FILE).write_text(json.dumps(node))
    assert main(["status", str(copy)]) == 2
    err = capsys.readouterr().err
    assert "schema version 2" in err and err.count("\n") == 1


if __name__ == "__main__":  # python -m tests.store.test_old_store FOLDER: write a fresh copy of the fixture
    import sys

    print(write_fixture(Path(sys.argv[1])))
