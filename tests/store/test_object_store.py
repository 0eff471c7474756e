"""Stores on an object store (a local S3-compatible server): runs, commands, atomic creation, claims, provenance."""

from __future__ import annotations

import json
import os
import socket
import time

import numpy as np
import pytest
import xarray as xr

from sweepshell import open_sweep
from sweepshell.cli.main import main
from sweepshell.store.location import ObjectPath, as_path, public_options
from sweepshell.store.metadata import ATTR, is_store, read_attrs
from tests.conftest import run_column_store

ETA = [0.1, 1.0, 10.0, 100.0]
LOAD = [0.5, 5.0, 40.0]


@pytest.fixture(scope="module")
def s3_store(s3_server: str, tmp_path_factory: pytest.TempPathFactory) -> dict[str, str]:
    """One column store on the server and its twin on local disk (the reference); read-only for the tests."""
    import uuid

    import s3fs

    bucket = f"sweepshell-{uuid.uuid4().hex[:12]}"
    s3fs.S3FileSystem(endpoint_url=s3_server, skip_instance_cache=True).mkdir(bucket)
    url = f"s3://{bucket}/results/column.zarr"
    run_column_store(url, ETA, LOAD, block_points=3)
    local = tmp_path_factory.mktemp("twin") / "column.zarr"
    run_column_store(local, ETA, LOAD, block_points=3)
    return {"url": url, "local": str(local), "bucket": f"s3://{bucket}"}


def test_a_sweep_on_s3_equals_the_same_sweep_on_disk(s3_store, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    got = open_sweep(s3_store["url"]).load()
    want = open_sweep(s3_store["local"]).load()
    xr.testing.assert_identical(got.drop_attrs(), want.drop_attrs())
    assert not any(tmp_path.iterdir())  # nothing local, no folder named 's3:'
    keys = as_path(s3_store["url"]).find()
    assert "zarr.json" in keys and not any(k.startswith((".claims", ".sweepshell")) for k in keys)
    # plain xarray opens the bucket too, without sweepshell
    plain = xr.open_zarr(s3_store["url"], consolidated=True, zarr_format=3)
    np.testing.assert_array_equal(plain["status"].values, want["status"].values)


def test_commands_read_and_write_s3_urls(s3_store, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    url, bucket = s3_store["url"], s3_store["bucket"]
    assert main(["catalog", f"{bucket}/results", "--json"]) == 0
    listing = json.loads(capsys.readouterr().out)
    assert [s["path"] for s in listing["stores"]] == ["column.zarr"] and listing["stores"][0]["total"] == 12
    assert main(["status", url, "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["total"] == 12
    assert main(["query", url, "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert len(rows["rows"] if isinstance(rows, dict) else rows) > 0
    assert main(["map", url, "--x", "stiffness_ratio", "--y", "load_ratio", "-o", str(tmp_path / "map.png")]) == 0
    assert (tmp_path / "map.png").stat().st_size > 0
    assert main(["verify", url]) == 0
    assert main(["export", url, "--format", "csv"]) == 0  # default output: the current folder
    assert (tmp_path / "column.csv").read_text().count("\n") == 13
    assert main(["export", url, "--format", "csv", "-o", f"{bucket}/exports/column.csv"]) == 0
    assert as_path(f"{bucket}/exports/column.csv").read_text() == (tmp_path / "column.csv").read_text()
    capsys.readouterr()
    merged = f"{bucket}/results/merged.zarr"
    assert main(["merge", url, s3_store["local"], "-o", merged]) == 0, capsys.readouterr().err
    xr.testing.assert_identical(open_sweep(merged).load().drop_attrs(), open_sweep(url).load().drop_attrs())
    assert not as_path(merged + "/.sweepshell-creating").exists()


def test_credentials_never_enter_provenance(s3_bucket, s3_server, monkeypatch):
    from sweepshell.config.loader import build_plan
    from sweepshell.store import location

    monkeypatch.setattr(location, "_OPTIONS", {})  # store.options are registered for the process: keep them here

    url = f"{s3_bucket}/secret.zarr"
    options = {"endpoint_url": s3_server, "key": "sweepshell-test", "secret": "sweepshell-test-secret"}
    plan = build_plan({"name": "column", "model": "winkler_column", "fixed": {"end": "pinned"},
                       "axes": {"stiffness_ratio": ETA, "load_ratio": LOAD},
                       "store": {"path": url, "options": options}, "executor": {"kind": "threads", "workers": 1},
                       "block": {"points": 6}, "reuse": False})
    assert "sweepshell-test-secret" not in repr(plan)
    from sweepshell import run_sweep

    assert run_sweep(plan).complete
    everything = "".join(as_path(f"{url}/{k}").read_text(errors="replace")
                         for k in as_path(url).find() if k.endswith("zarr.json"))
    assert "sweepshell-test-secret" not in everything and '"key"' not in read_attrs(url)[ATTR.sweep_yaml]
    assert s3_server in read_attrs(url)[ATTR.sweep_yaml]  # the endpoint says where the store lives
    assert public_options({"secret": "x", "token": "y", "profile": "p", "anon": True}) == {"anon": True}


def test_a_killed_creation_is_cleared_and_never_seen_as_a_store(s3_bucket):
    url = f"{s3_bucket}/results/column.zarr"
    loc = as_path(url)
    assert isinstance(loc, ObjectPath)
    # what a creator killed mid-upload leaves: its marker (a process that is gone) and some arrays, no root
    (loc / ".sweepshell-creating").write_text(json.dumps({"runner": f"{socket.gethostname()}:999999999",
                                                           "started": time.time()}))
    (loc / "status" / "zarr.json").write_text("{}")
    assert not is_store(url)
    with pytest.raises(Exception):  # noqa: B017 - plain xarray cannot open it either
        xr.open_zarr(url, zarr_format=3, consolidated=False)
    assert main(["catalog", f"{s3_bucket}/results", "--json"]) == 0
    run_column_store(url, ETA, LOAD, block_points=3)
    assert is_store(url) and not (loc / ".sweepshell-creating").exists()


def test_a_live_creation_elsewhere_is_waited_for_not_cleared(s3_bucket):
    from sweepshell.store.publish import clean_stale_temporaries

    loc = as_path(f"{s3_bucket}/x.zarr")
    assert isinstance(loc, ObjectPath)
    (loc / ".sweepshell-creating").write_text(json.dumps({"runner": f"{socket.gethostname()}:{os.getpid()}",
                                                           "started": time.time()}))
    assert not clean_stale_temporaries(loc) and (loc / ".sweepshell-creating").exists()


def test_object_claims_lease_and_take_over_once(s3_bucket):
    from sweepshell.engine.claims import open_claims

    store = f"{s3_bucket}/claims.zarr"
    a, b, c = (open_claims(store, ttl=0.5) for _ in range(3))
    assert a.coordinated  # the server honours create-if-absent
    assert a.try_claim((0, 1))
    assert not b.try_claim((0, 1)) and not c.try_claim((0, 1))   # a's lease runs
    a.heartbeat()
    assert not b.try_claim((0, 1))
    time.sleep(0.7)                                               # a stopped renewing: its lease ran out
    won = [b.try_claim((0, 1)), c.try_claim((0, 1))]
    assert won.count(True) == 1                                   # exactly one takes it over
    winner = b if won[0] else c
    assert winner.taken_over == 1
    record = json.loads(as_path(f"{store}/.claims").glob("block-0-1.g1.claim")[0].read_text())
    assert record["runner"] == winner.runner and record["lease_until"] > time.time()
    winner.release_all()
    assert a.try_claim((0, 1))
    a.release_all()
    assert as_path(f"{store}/.claims").find() == []


def test_memory_store_with_threads_works_in_process():
    summary_path = "memory://sweepshell-test/column.zarr"
    run_column_store(summary_path, ETA, LOAD, block_points=3)
    assert int((open_sweep(summary_path).status.values != 0).sum()) == 12


def test_storage_faults_are_one_line_with_the_fix(s3_server, workdir, monkeypatch, capsys):
    import s3fs

    from sweepshell.store import location
    from tests.conftest import SMALL_COLUMN_SWEEP, write_sweep

    write_sweep(workdir, SMALL_COLUMN_SWEEP, name="col.yaml")
    run = ["run", "col.yaml", "--progress", "none", "executor=threads"]
    assert main([*run, "store.path=s3://no-such-bucket-here/x.zarr"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "the bucket does not exist" in err[0] and "Traceback" not in err[0]
    for name in ("AWS_ACCESS_KEY_ID", "AWS_SECRET_ACCESS_KEY"):
        monkeypatch.delenv(name)
    monkeypatch.setenv("AWS_SHARED_CREDENTIALS_FILE", str(workdir / "none"))
    monkeypatch.setenv("AWS_CONFIG_FILE", str(workdir / "none"))
    monkeypatch.setenv("AWS_EC2_METADATA_DISABLED", "true")
    s3fs.S3FileSystem.clear_instance_cache()
    location._filesystem.cache_clear()
    try:
        assert main(["status", "s3://some-bucket/x.zarr"]) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and "needs credentials" in err[0] and "AWS_ACCESS_KEY_ID" in err[0]
    finally:
        s3fs.S3FileSystem.clear_instance_cache()
        location._filesystem.cache_clear()


def test_a_store_url_resumes_by_itself_and_catalog_clean_clears_a_dead_creation(s3_bucket, tmp_path, monkeypatch,
                                                                                  capsys):
    monkeypatch.chdir(tmp_path)
    url = f"{s3_bucket}/results/column.zarr"
    run_column_store(url, ETA, LOAD, block_points=3)
    capsys.readouterr()
    assert main(["run", url, "--progress", "none", "executor=threads"]) == 0  # the store's own recorded sweep
    assert "nothing to compute" in capsys.readouterr().out
    dead = as_path(f"{s3_bucket}/results/half.zarr")
    (dead / ".sweepshell-creating").write_text(json.dumps({"runner": f"{socket.gethostname()}:999999999",
                                                            "started": time.time()}))
    (dead / "status" / "zarr.json").write_text("{}")
    assert main(["catalog", f"{s3_bucket}/results", "--clean", "--json"]) == 0
    listing = json.loads(capsys.readouterr().out)
    assert listing["leftovers"] == ["half.zarr"] and [s["path"] for s in listing["stores"]] == ["column.zarr"]
    assert dead.find() == [] and is_store(url)


def test_without_conditional_writes_claims_say_one_runner_per_store(s3_bucket, monkeypatch, caplog):
    from sweepshell.engine.claims import open_claims
    from sweepshell.store.objectpath import ObjectPath as _ObjectPath

    def ignores_the_condition(self, data):  # a server that accepts If-None-Match and overwrites anyway
        self.write_bytes(data)
        return True

    monkeypatch.setattr(_ObjectPath, "create_exclusive", ignores_the_condition)
    with caplog.at_level("WARNING"):
        book = open_claims(f"{s3_bucket}/x.zarr")
    assert not book.coordinated
    assert "does not honour conditional writes" in caplog.text and "one runner per store" in caplog.text
    assert book.try_claim((0,)) and (0,) in book.held
    book.release_all()
    assert as_path(f"{s3_bucket}/x.zarr").find() == []  # the probe leaves nothing behind


def test_verify_repair_on_a_bucket_then_the_run_restores_it(s3_bucket, s3_store, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    url = f"{s3_bucket}/results/column.zarr"
    run_column_store(url, ETA, LOAD, block_points=3)
    chunk = as_path(f"{url}/critical_load/c/1/0")
    chunk.write_bytes(chunk.read_bytes()[:7])  # a chunk cut short
    assert main(["verify", url]) == 1
    assert "critical_load" in capsys.readouterr().out
    assert main(["verify", url, "--repair"]) == 1  # problems were found (and repaired)
    assert "repaired: 1 blocks" in capsys.readouterr().out
    assert main(["run", url, "--progress", "none", "executor=threads"]) == 0
    xr.testing.assert_identical(open_sweep(url).load().drop_attrs(),
                                open_sweep(s3_store["local"]).load().drop_attrs())


def test_refine_and_boundary_record_points_in_a_bucket_store(s3_bucket, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    url = f"{s3_bucket}/results/column.zarr"
    run_column_store(url, ETA, [0.5, 5.0, 20.0, 40.0], block_points=4)
    assert main(["refine", url, "--levels", "1"]) == 0
    capsys.readouterr()
    assert main(["status", url, "--json"]) == 0
    assert sum(json.loads(capsys.readouterr().out)["off_grid_points"].values()) == 21
    assert main(["boundary", url, "--between", "stable", "buckled", "--bisections", "1", "--format", "json"]) == 0
    assert json.loads(capsys.readouterr().out)
