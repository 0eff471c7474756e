"""Queries: the where-expression guard, each output format, trusted points only, the accessor."""

from __future__ import annotations

import csv
import io
import json

import numpy as np
import pytest

import sweepshell.query  # noqa: F401  (registers the .sweep accessor)
from sweepshell import CAUTION, open_sweep
from sweepshell.cli.main import main
from sweepshell.errors import QueryError
from sweepshell.models.base import Status
from sweepshell.models.winkler_column.model import winkler_column_critical
from sweepshell.query.expression import check_expression
from tests.conftest import FAULTY_OVERRIDES, compute_column_store


@pytest.fixture(scope="module")
def faulty_store(tmp_path_factory):
    return compute_column_store(tmp_path_factory.mktemp("qf"), "faulty", FAULTY_OVERRIDES)


def run_cli(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_json_lists_points_with_axes_fields_and_regime_names(column_store, capsys):
    code, out, err = run_cli(capsys, "query", str(column_store), "--where", "stiffness_ratio > 900", "--fields",
                             "critical_load,regime", "--format", "json")
    assert code == 0
    rows = json.loads(out)
    assert len(rows) == 15  # the last stiffness value (1000) at every load ratio
    assert set(rows[0]) == {"stiffness_ratio", "load_ratio", "critical_load", "regime"}
    # P_cr L²/(π²B) at η = 1000 is 63.778 (Timoshenko & Gere 1961, pinned beam on a Winkler foundation)
    assert rows[0]["critical_load"] == pytest.approx(63.778, abs=1e-3)
    assert {r["regime"] for r in rows} == {"stable"}  # every load ratio (≤ 40) is below 63.8
    assert CAUTION in err and CAUTION not in out


def test_regime_at_a_known_point_matches_the_closed_form(column_store):
    ds = open_sweep(column_store)
    table = ds.sweep.query("regime == 'buckled'", fields=["critical_load"])
    expected, _ = winkler_column_critical(table.stiffness_ratio.to_numpy())
    assert len(table) > 0
    assert np.all(table.load_ratio.to_numpy() >= expected)
    np.testing.assert_allclose(table.critical_load.to_numpy(), expected, rtol=1e-12)
    # exactly the grid points above the closed-form critical load are buckled
    eta, load = np.meshgrid(ds.stiffness_ratio.values, ds.load_ratio.values, indexing="ij")
    assert len(table) == int(np.sum(load >= winkler_column_critical(eta)[0]))


def test_csv_round_trips_full_precision(column_store, capsys):
    code, out, _ = run_cli(capsys, "query", str(column_store), "--where", 'regime == "stable" and load_ratio < 1',
                           "--format", "csv", "--sort=-critical_load", "--limit", "3")
    assert code == 0
    rows = list(csv.DictReader(io.StringIO(out)))
    assert len(rows) == 3
    values = [float(r["critical_load"]) for r in rows]
    assert values == sorted(values, reverse=True)
    assert float(rows[0]["stiffness_ratio"]) == 1000.0
    assert rows[0]["regime"] == "stable"
    ds = open_sweep(column_store)
    assert float(rows[0]["load_ratio"]) == ds.load_ratio.values[0]  # repr keeps every digit


def test_table_is_aligned_and_the_caution_goes_to_stderr(column_store, capsys):
    code, out, err = run_cli(capsys, "query", str(column_store), "--fields", "critical_load", "--limit", "4")
    assert code == 0
    lines = out.splitlines()
    assert lines[0].split() == ["stiffness_ratio", "load_ratio", "critical_load"]
    assert len(lines) == 2 + 4 and set(lines[1]) <= {"-", " "}
    assert float(lines[2].split()[2]) == pytest.approx(1.1)  # η = 0.1: 1 + 0.1, one half-wave
    assert CAUTION in err


def test_only_trusted_points_unless_all(faulty_store, capsys):
    _, out, _ = run_cli(capsys, "query", str(faulty_store), "--format", "json", "--fields", "regime")
    trusted = json.loads(out)
    _, out, _ = run_cli(capsys, "query", str(faulty_store), "--format", "json", "--all")
    everything = json.loads(out)
    ds = open_sweep(faulty_store)
    status = ds.status.values
    n_trusted = int(np.isin(status, [Status.ok, Status.no_instability]).sum())
    assert len(trusted) == n_trusted < len(everything) == status.size
    failed = [r for r in everything if r["status"] == "failed"]
    assert len(failed) == 20 and all(r["load_ratio"] == 0.5 and r["critical_load"] is None for r in failed)
    assert all(r["regime"] == "none" for r in failed)
    _, out, _ = run_cli(capsys, "query", str(faulty_store), "--all", "--where", 'status == "outside_validity"',
                        "--format", "json", "--fields", "status")
    outside = json.loads(out)
    assert outside and all(r["stiffness_ratio"] > 500 for r in outside)


@pytest.mark.parametrize("expr", [
    "__import__('os')",
    "__import__('os').system('true')",
    "load_ratio.__class__",
    "().__class__.__bases__",
    "load_ratio[0] > 1",
    "[x for x in (1, 2)]",
    "(lambda: 1)()",
    "_hidden > 1",
    "open('/etc/passwd')",
    "@load_ratio > 1",
    "load_ratio > 1; import os",
    "(x := 1)",
    "load_ratio @ load_ratio",
    "regime == \"nonexistent\"",
    "unknown_field > 1",
])
def test_unsafe_or_bad_expressions_are_refused_with_exit_2(column_store, capsys, expr):
    code, out, err = run_cli(capsys, "query", str(column_store), "--where", expr)
    assert code == 2
    assert out == ""
    assert err.startswith("sweepshell: error: --where") and err.count("\n") == 1


def test_checker_accepts_the_documented_grammar():
    columns = ["x", "y", "regime", "status"]
    for expr in ["x > 5 and regime == 'b'", "2 < x <= 5", "regime in ['a', 'b']", "not (x > 1) or y != 2",
                 "(x + y) / 2 > 1 & ~(y < 0)", "status not in ['failed']", "-x < 2 ** 3 % 5"]:
        assert check_expression(expr, columns, {"regime": ["a", "b"], "status": ["failed", "ok"]}) == expr
    with pytest.raises(QueryError, match="unknown name 'z'"):
        check_expression("z > 1", columns)


def test_bad_fields_sort_and_missing_store_are_one_line_errors(column_store, tmp_path, capsys):
    for argv in (["--fields", "nope"], ["--fields", "load_path"], ["--sort", "nope"], ["--fields", " , "],
                 ["--limit", "-1"]):
        code, out, err = run_cli(capsys, "query", str(column_store), *argv)
        assert code == 2 and out == "" and err.count("\n") == 1, argv
    code, out, err = run_cli(capsys, "query", str(tmp_path / "missing.zarr"))
    assert code == 2 and "no store" in err


def test_accessor_and_cli_agree(column_store, capsys):
    ds = open_sweep(column_store)
    table = ds.sweep.query("load_ratio > 30", fields=["margin", "regime"], sort="margin")
    _, out, _ = run_cli(capsys, "query", str(column_store), "--where", "load_ratio > 30", "--fields", "margin,regime",
                        "--sort", "margin", "--format", "json")
    rows = json.loads(out)
    assert len(rows) == len(table)
    assert [r["margin"] for r in rows] == pytest.approx(table.margin.tolist())
    assert ds.sweep.regime_names == ("stable", "buckled")
    assert bool(ds.sweep.trusted.all())
    labels = ds.sweep.regime_label()
    assert labels.sel(stiffness_ratio=1000.0, load_ratio=0.5).item() == "stable"
