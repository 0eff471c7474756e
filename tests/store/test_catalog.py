"""The catalog of a results folder: counts from real stores, an index that is a cache and never trusted."""

from __future__ import annotations

import json
import os
import shutil
import sqlite3
from pathlib import Path

import numpy as np
import pytest

from sweepshell.cli.main import main
from sweepshell.models.base import Status
from sweepshell.store.catalog import CATALOG_FILE, find_compatible_stores, read_catalog
from tests.conftest import run_column_store

ETA = [0.1, 1.0, 10.0, 100.0]
LOAD = [0.5, 1.0, 5.0, 20.0, 40.0]


@pytest.fixture(scope="module")
def results_template(tmp_path_factory) -> Path:
    """A results folder with three stores: two of one model version/settings, one with other settings."""
    root = tmp_path_factory.mktemp("catalog") / "results"
    run_column_store(root / "a.zarr", ETA, LOAD)
    run_column_store(root / "team" / "b.zarr", [1000.0, 2000.0], LOAD)
    run_column_store(root / "c.zarr", ETA, [1.0, 2.0], settings={"path_samples": 4})
    return root


@pytest.fixture
def results(results_template, tmp_path) -> Path:
    root = tmp_path / "results"
    shutil.copytree(results_template, root, symlinks=True)
    (root / CATALOG_FILE).unlink(missing_ok=True)
    return root


def test_catalog_lists_every_store_with_counts_axes_and_sizes(results):
    listing = read_catalog(results)
    assert [e.path for e in listing.entries] == ["a.zarr", "c.zarr", "team/b.zarr"]
    a, c, b = listing.entries
    assert a.model == "winkler_column" and a.model_version == "1.0" and a.sweep == "column"
    assert a.total == 20 and b.total == 10 and c.total == 8
    # the closed form decides the statuses: buckled (ok) where the load reaches P_cr, else no_instability
    assert a.counts["ok"] + a.counts["no_instability"] == 20 and a.counts["pending"] == 0
    assert a.counts["ok"] == 9 and a.complete
    assert a.axes[0] == {"name": "stiffness_ratio", "size": 4, "min": 0.1, "max": 100.0, "values": ETA}
    assert a.axes[1]["min"] == 0.5 and a.axes[1]["max"] == 40.0
    on_disk = sum(f.stat().st_size for f in (results / "a.zarr").rglob("*") if f.is_file())
    assert a.bytes_on_disk == on_disk > 0
    assert a.created is not None and a.updated is not None and a.updated >= a.created
    assert json.loads(c.settings_json)["path_samples"] == 4
    assert listing.reread == 3 and (results / CATALOG_FILE).is_file()


def test_index_serves_unchanged_stores_and_rereads_changed_ones(results):
    read_catalog(results)
    second = read_catalog(results)
    assert second.reread == 0 and not second.rebuilt
    import zarr

    status = zarr.open_array(str(results / "a.zarr" / "status"), mode="r+")
    status[0:2, :] = Status.pending  # as if a block were reset; the status chunk files change
    third = read_catalog(results)
    assert third.reread == 1
    a = third.entries[0]
    assert a.counts["pending"] == 10 and not a.complete
    shutil.rmtree(results / "c.zarr")
    fourth = read_catalog(results)
    assert [e.path for e in fourth.entries] == ["a.zarr", "team/b.zarr"] and fourth.reread == 0
    with sqlite3.connect(results / CATALOG_FILE) as con:
        assert sorted(r[0] for r in con.execute("SELECT path FROM stores")) == ["a.zarr", "team/b.zarr"]


@pytest.mark.parametrize("damage", ["garbage", "foreign", "forged"])
def test_corrupted_foreign_or_forged_index_is_rebuilt_or_ignored(results, damage):
    first = read_catalog(results)
    index = results / CATALOG_FILE
    if damage == "garbage":
        index.write_bytes(os.urandom(4096))
    elif damage == "foreign":
        index.unlink()
        with sqlite3.connect(index) as con:
            con.execute("CREATE TABLE stores (path TEXT, fingerprint TEXT, record TEXT)")
            con.execute("INSERT INTO stores VALUES ('../../etc', 'x', '{}')")
    else:  # our format, but records that lie: wrong counts with a wrong path, and a non-JSON record
        with sqlite3.connect(index) as con:
            rows = list(con.execute("SELECT path, fingerprint, record FROM stores"))
            for path, _fingerprint, record in rows:
                data = json.loads(record)
                data["counts"]["ok"] = 999_999
                data["path"] = "../outside.zarr"
                con.execute("UPDATE stores SET record = ? WHERE path = ?", (json.dumps(data), path))
            con.execute("UPDATE stores SET record = 'not json' WHERE path = 'c.zarr'")
    again = read_catalog(results)
    assert [e.to_dict() for e in again.entries] == [e.to_dict() for e in first.entries]
    assert again.rebuilt == (damage != "forged") and again.reread == 3
    assert read_catalog(results).reread == 0  # and the rebuilt index is usable


def test_a_busy_index_is_left_alone_and_the_listing_still_works(results, monkeypatch):
    from sweepshell.store import catalog_index

    first = read_catalog(results)
    monkeypatch.setattr(catalog_index, "_LOCK_TIMEOUT_SECONDS", 0.05)
    holder = sqlite3.connect(results / CATALOG_FILE)
    holder.execute("BEGIN EXCLUSIVE")  # another process is writing the index
    try:
        busy = read_catalog(results)
    finally:
        holder.rollback()
        holder.close()
    assert busy.index_path is None and busy.reread == 3
    assert [e.to_dict() for e in busy.entries] == [e.to_dict() for e in first.entries]
    assert read_catalog(results).reread == 0  # the index survived


def test_paths_cannot_escape_the_results_folder(results, tmp_path):
    outside = tmp_path / "elsewhere"
    outside.mkdir()
    shutil.copytree(results / "a.zarr", outside / "x.zarr")
    (results / "link.zarr").symlink_to(outside / "x.zarr")
    (results / "linkdir").symlink_to(outside)
    # a store whose chunk is a link to a file outside: listed with a problem, not read
    inner = results / "c.zarr" / "status" / "c" / "0" / "0"
    inner.unlink()
    inner.symlink_to(outside / "x.zarr" / "status" / "c" / "0" / "0")
    listing = read_catalog(results)
    paths = [e.path for e in listing.entries]
    assert paths == ["a.zarr", "c.zarr", "team/b.zarr"]
    c = listing.entries[1]
    assert c.problem is not None and "symbolic links" in c.problem and c.total == 0


def test_find_compatible_stores_matches_model_version_and_settings_exactly(results):
    a_attrs = json.loads((results / "a.zarr" / "zarr.json").read_text())["attributes"]
    found = find_compatible_stores(results, "winkler_column", "1.0", a_attrs["model_settings_json"])
    assert found == [results / "a.zarr", results / "team" / "b.zarr"]
    assert find_compatible_stores(results, "winkler_column", "1.1", a_attrs["model_settings_json"]) == []
    c_settings = json.loads((results / "c.zarr" / "zarr.json").read_text())["attributes"]["model_settings_json"]
    assert find_compatible_stores(results, "winkler_column", "1.0", c_settings) == [results / "c.zarr"]
    fixed = a_attrs["fixed_parameters_json"]
    assert len(find_compatible_stores(results, "winkler_column", "1.0", a_attrs["model_settings_json"],
                                      fixed_json=fixed)) == 2
    assert find_compatible_stores(results, "winkler_column", "1.0", a_attrs["model_settings_json"],
                                  fixed_json='{"end": "weak"}') == []
    # a forged index saying c.zarr has a's settings does not fool the lookup: the store itself is checked
    with sqlite3.connect(results / CATALOG_FILE) as con:
        path, record = next(iter(con.execute("SELECT path, record FROM stores WHERE path = 'c.zarr'")))
        data = json.loads(record)
        data["settings_json"] = a_attrs["model_settings_json"]
        con.execute("UPDATE stores SET record = ? WHERE path = ?", (json.dumps(data), path))
    assert results / "c.zarr" not in find_compatible_stores(results, "winkler_column", "1.0",
                                                            a_attrs["model_settings_json"])
    assert find_compatible_stores(results / "missing", "winkler_column", "1.0", "{}") == []


def test_catalog_command_prints_table_and_json(results, capsys):
    assert main(["catalog", str(results)]) == 0
    out = capsys.readouterr().out
    assert "a.zarr: winkler_column 1.0, sweep column, 20/20 final (9 ok, 11 no_instability)" in out
    assert "stiffness_ratio[4] 0.1..100" in out and "3 stores under" in out
    assert main(["catalog", str(results), "--json"]) == 0
    info = json.loads(capsys.readouterr().out)
    assert [s["path"] for s in info["stores"]] == ["a.zarr", "c.zarr", "team/b.zarr"]
    assert info["stores"][0]["counts"]["ok"] == 9 and info["stores"][0]["complete"] is True
    assert main(["catalog", str(results / "nope")]) == 2
    assert "does not exist" in capsys.readouterr().err


def test_unreadable_store_is_listed_with_its_problem(results):
    meta = results / "a.zarr" / "zarr.json"
    data = json.loads(meta.read_text())
    data["attributes"]["sweepshell_schema"] = 99
    meta.write_text(json.dumps(data))
    entry = read_catalog(results).entries[0]
    assert entry.path == "a.zarr" and entry.problem is not None and "schema version 99" in entry.problem
    assert np.isclose(entry.bytes_on_disk, sum(f.stat().st_size for f in (results / "a.zarr").rglob("*")
                                               if f.is_file()))
