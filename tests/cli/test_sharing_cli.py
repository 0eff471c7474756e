"""The sharing commands end to end: merge two colleagues' stores, list, check and export the result."""

from __future__ import annotations

import csv
import json
import subprocess
import sys

from sweepshell.cli.main import main
from tests.conftest import run_column_store


def test_commands_are_listed_and_help_imports_no_heavy_library():
    code = ("import sys; from sweepshell.cli.main import build_parser; p = build_parser(); "
            "print(p.format_help()); "
            "print(sorted(m for m in ('xarray', 'zarr', 'pandas', 'dask', 'sqlite3') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    for command in ("catalog", "merge", "verify", "export"):
        assert command in out
    assert out.strip().splitlines()[-1] == "[]"


def test_merge_then_catalog_verify_and_export(tmp_path, capsys):
    results = tmp_path / "results"
    run_column_store(results / "alice.zarr", [0.1, 1.0, 10.0], [0.5, 5.0, 40.0])
    run_column_store(results / "bob.zarr", [10.0, 100.0], [0.5, 1.0, 40.0])
    merged = results / "team.zarr"
    assert main(["merge", str(results / "alice.zarr"), str(results / "bob.zarr"), "-o", str(merged)]) == 0
    line = capsys.readouterr().out
    # union 4 eta x 4 loads = 16 points; alice 9, bob 6 (eta 10 shared at 2 loads), 3 computed by neither
    assert "merged 16 points" in line and "9 from A, 4 from B (2 in both and equal" in line and "3 pending" in line

    assert main(["catalog", str(results), "--json"]) == 0
    listing = json.loads(capsys.readouterr().out)
    team = {s["path"]: s for s in listing["stores"]}["team.zarr"]
    assert team["total"] == 16 and team["counts"]["pending"] == 3 and team["complete"] is False
    assert [a["size"] for a in team["axes"]] == [4, 4]

    assert main(["verify", str(merged), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["consistent"] is True and report["recompute"]["points"] > 0

    assert main(["export", str(merged), "--format", "csv", "-o", str(tmp_path / "team.csv")]) == 0
    rows = list(csv.DictReader((tmp_path / "team.csv").open()))
    assert len(rows) == 16 and sum(r["status"] == "pending" for r in rows) == 3
    assert all(r["critical_load"] == "" for r in rows if r["status"] == "pending")
