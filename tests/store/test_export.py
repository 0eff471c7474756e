"""export: CSV and netCDF hold exactly the store's values; parquet without pyarrow fails cleanly."""

from __future__ import annotations

import csv
import importlib.util
import io
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from sweepshell import open_sweep, run_sweep
from sweepshell.cli.main import main
from sweepshell.config.loader import build_plan
from sweepshell.models.base import Status
from sweepshell.store.export import export_store

ETA = [0.1, 10.0, 100.0, 1000.0, 5000.0]
LOAD = [0.5, 1.0, 40.0]
END = ["pinned", "weak"]


@pytest.fixture(scope="module")
def store(tmp_path_factory) -> Path:
    """30 points over a categorical axis too; load 1.0 fails and eta above 2000 is outside validity."""
    path = tmp_path_factory.mktemp("export") / "e.zarr"
    plan = build_plan({"name": "e", "model": "winkler_column", "settings": {"fail_at": 1.0, "validity_limit": 2000.0},
                       "axes": {"stiffness_ratio": ETA, "load_ratio": LOAD, "end": END},
                       "store": {"path": str(path)}, "executor": {"kind": "threads", "workers": 1},
                       "block": {"points": 12}})
    assert run_sweep(plan).complete
    return path


def _read_csv(text: str) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(text)))


def test_csv_has_one_row_per_point_with_exact_values_and_names(store, tmp_path):
    target = export_store(store, "csv", tmp_path / "e.csv")
    rows = _read_csv(target.read_text())
    assert len(rows) == 30
    assert list(rows[0]) == ["stiffness_ratio", "load_ratio", "end", "critical_load", "margin", "mode_number",
                             "regime", "status"]
    ds = open_sweep(store).load()
    # C order over the axes: end varies fastest
    assert [r["end"] for r in rows[:4]] == ["pinned", "weak", "pinned", "weak"]
    for row in rows:
        point = ds.sel({"stiffness_ratio": float(row["stiffness_ratio"]), "load_ratio": float(row["load_ratio"]),
                        "end": row["end"]})
        status = Status(int(point.status))
        assert row["status"] == status.name
        expected = float(point.critical_load)
        if np.isnan(expected):
            assert row["critical_load"] == "" and row["regime"] == "none"
        else:
            assert float(row["critical_load"]) == expected  # bit for bit
            assert row["regime"] == ("stable", "buckled")[int(point.regime)]
    statuses = {r["status"] for r in rows}
    assert statuses == {"ok", "no_instability", "failed", "outside_validity"}
    # the test model marks fail_at after the validity limit: load 1.0 fails at every eta
    assert sum(r["status"] == "failed" for r in rows) == 10  # 5 eta x 2 ends
    assert sum(r["status"] == "outside_validity" for r in rows) == 4  # eta 5000 x loads 0.5, 40 x 2 ends


@pytest.mark.parametrize("engine", ["scipy", "h5netcdf"])
def test_netcdf_round_trips_every_variable_and_coordinate(store, tmp_path, engine):
    target = export_store(store, "netcdf", tmp_path / "e.nc", engine=engine)
    back = xr.open_dataset(target, engine=engine).load()
    ds = open_sweep(store).load()
    assert back.end.values.tolist() == END
    for name in ds.data_vars:
        np.testing.assert_array_equal(back[name].values, ds[name].values.astype(back[name].dtype))
    # netCDF3 has no unsigned bytes; netCDF4 keeps the ledger's uint8
    assert back.status.dtype == (np.int8 if engine == "scipy" else np.uint8)
    assert back.load_path.dims[-1] == "path_sample"
    for name in ("status", "regime"):  # CF: flag values in the variable's own type
        flags = np.asarray(back[name].attrs["flag_values"])
        assert flags.dtype == back[name].dtype, (name, flags.dtype)
    assert back.status.attrs["flag_values"].tolist() == [0, 1, 2, 3, 4, 5]
    assert back.regime.attrs["flag_meanings"].split() == ["none", "stable", "buckled"]
    assert back.attrs["regimes"] == "stable buckled" and back.attrs["model"] == "winkler_column"
    assert "Caution" in back.attrs["caution"] and back.critical_load.attrs["units"] == "1"
    assert "units" not in back.end.attrs and back.stiffness_ratio.attrs["units"] == "1"
    # the exported file answers the same questions as the store
    where = 'regime == "buckled" and end == "pinned"'
    mine = ds.sweep.query(where, ["critical_load"])
    theirs = back.sweep.query(where, ["critical_load"])
    assert len(theirs) == len(mine) > 0
    np.testing.assert_array_equal(theirs["critical_load"].to_numpy(), mine["critical_load"].to_numpy())
    back.close()


def test_netcdf_engine_choice_is_checked(store, tmp_path, capsys):
    assert main(["export", str(store), "--format", "csv", "--engine", "scipy", "-o", str(tmp_path / "e.csv")]) == 2
    assert "not a netCDF engine" in capsys.readouterr().err
    assert list(tmp_path.iterdir()) == []


def test_parquet_holds_one_row_per_point(store, tmp_path):
    import pandas as pd

    pytest.importorskip("pyarrow", reason="the test extra installs pyarrow; parquet export needs it")
    target = export_store(store, "parquet", tmp_path / "e.parquet")
    table = pd.read_parquet(target)
    assert len(table) == 30 and set(table["status"]) == {"ok", "no_instability", "failed", "outside_validity"}
    import pyarrow.parquet as pq

    schema = pq.read_schema(target)
    assert schema.field("critical_load").metadata[b"units"] == b"1"
    assert schema.field("stiffness_ratio").metadata[b"long_name"].startswith(b"foundation parameter")
    assert schema.field("end").metadata is None or b"units" not in schema.field("end").metadata


def test_parquet_without_pyarrow_is_a_clear_exit_2(store, tmp_path, capsys, monkeypatch):
    real_find_spec = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec",
                        lambda name, *a: None if name == "pyarrow" else real_find_spec(name, *a))
    assert main(["export", str(store), "--format", "parquet", "-o", str(tmp_path / "e.parquet")]) == 2
    assert "pip install pyarrow" in capsys.readouterr().err
    assert list(tmp_path.iterdir()) == []


def test_export_command_default_path_existing_output_and_stdout(store, tmp_path, capsys):
    import shutil

    copy = tmp_path / "run.zarr"
    shutil.copytree(store, copy)
    assert main(["export", str(copy), "--format", "csv"]) == 0
    default = tmp_path / "run.csv"
    assert default.is_file() and len(_read_csv(default.read_text())) == 30
    capsys.readouterr()
    assert main(["export", str(copy), "--format", "csv"]) == 2
    assert "exists" in capsys.readouterr().err
    default.write_text("old")
    assert main(["export", str(copy), "--format", "csv", "--force"]) == 0
    assert len(_read_csv(default.read_text())) == 30
    capsys.readouterr()
    assert main(["export", str(copy), "--format", "csv", "-o", "-"]) == 0
    out = capsys.readouterr().out
    assert len(_read_csv(out)) == 30 and out == default.read_text()
    assert main(["export", str(copy), "--format", "netcdf", "-o", "-"]) == 2
    assert main(["export", str(copy), "--format", "csv", "-o", str(copy / "inside.csv")]) == 2
    assert main(["export", str(tmp_path / "missing.zarr"), "--format", "csv"]) == 2
    assert not list(tmp_path.glob(".*tmp*"))
