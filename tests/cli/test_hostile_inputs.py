"""Hostile and careless input, one table: every case is one line on stderr, a known exit code, nothing written.

Each case prepares a working folder (a small ``winkler_column`` store and its sweep file, then
damages or perturbs something), runs one command through the CLI entry function, and checks

- the exit code,
- that stderr is exactly one line matching the expected message (and no ``Traceback`` anywhere),
- that the working folder is byte-identical afterwards (nothing written, nothing repaired silently),
- for the inputs that used to hang or exhaust memory: the elapsed time and the peak of Python
  allocations (tracemalloc) stay under generous guards — these catch a hang or an expansion
  before a check, not a slowdown.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import shutil
import time
import tracemalloc
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest

from sweepshell.cli.main import main
from tests.conftest import SMALL_COLUMN_ETA as ETA
from tests.conftest import SMALL_COLUMN_LOAD as LOAD
from tests.conftest import SMALL_COLUMN_STORE as STORE
from tests.conftest import SMALL_COLUMN_SWEEP as SWEEP
from tests.conftest import run_column_store

#: guards for the cases that used to hang (minutes) or run out of memory: far above what a refusal costs
HANG_SECONDS = 10.0
HANG_PEAK_BYTES = 64_000_000


@pytest.fixture(scope="module")
def store_template(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("hostile") / "column.zarr"
    return run_column_store(path, ETA, LOAD, block_points=3)


@dataclass(frozen=True)
class Case:
    id: str
    argv: list[str]
    code: int
    message: str
    setup: Callable[[Path], None] | None = None
    bounded: bool = False


def _root_attrs(work: Path, change: Callable[[dict], None]) -> None:
    file = work / STORE / "zarr.json"
    meta = json.loads(file.read_text())
    change(meta["attributes"])
    file.write_text(json.dumps(meta))


def _settings(key: str, value: object) -> Callable[[Path], None]:
    def setup(work: Path) -> None:
        def change(attrs: dict) -> None:
            settings = json.loads(attrs["model_settings_json"])
            settings[key] = value
            attrs["model_settings_json"] = json.dumps(settings)
        _root_attrs(work, change)
    return setup


def _write(name: str, text: str) -> Callable[[Path], None]:
    def setup(work: Path) -> None:
        (work / name).write_text(text)
    return setup


def _remove(rel: str) -> Callable[[Path], None]:
    def setup(work: Path) -> None:
        target = work / STORE / rel
        shutil.rmtree(target) if target.is_dir() else target.unlink()
    return setup


def _flip_byte(work: Path) -> None:
    chunk = work / STORE / "critical_load" / "c" / "1" / "0"
    data = bytearray(chunk.read_bytes())
    data[len(data) // 2] ^= 0xFF
    chunk.write_bytes(bytes(data))


def _consolidated_dtype(work: Path) -> None:
    file = work / STORE / "zarr.json"
    meta = json.loads(file.read_text())
    meta["consolidated_metadata"]["metadata"]["critical_load"]["data_type"] = "int32"
    file.write_text(json.dumps(meta))


def _nan_at_trusted_point(work: Path) -> None:
    import zarr

    arr = zarr.open_array(str(work / STORE / "critical_load"), mode="r+", zarr_format=3)
    arr[2, 1] = np.nan


def _unknown_status(work: Path) -> None:
    import zarr

    arr = zarr.open_array(str(work / STORE / "status"), mode="r+", zarr_format=3)
    arr[0, :] = 77


def _axes_claim(count: int) -> Callable[[Path], None]:
    def change(attrs: dict) -> None:
        attrs["axes_json"] = '{"load_ratio": [0.5, 5.0, 40.0], "stiffness_ratio": [' + ",".join(["0"] * count) + "]}"
    return lambda work: _root_attrs(work, change)


ALIAS_BOMB = """\
name: bomb
model: winkler_column
description:
  a: &a ["lol", "lol", "lol", "lol", "lol", "lol", "lol", "lol", "lol"]
  b: &b [*a, *a, *a, *a, *a, *a, *a, *a, *a]
  c: &c [*b, *b, *b, *b, *b, *b, *b, *b, *b]
  d: &d [*c, *c, *c, *c, *c, *c, *c, *c, *c]
  e: &e [*d, *d, *d, *d, *d, *d, *d, *d, *d]
  f: &f [*e, *e, *e, *e, *e, *e, *e, *e, *e]
  g: &g [*f, *f, *f, *f, *f, *f, *f, *f, *f]
  h: [*g, *g, *g, *g, *g, *g, *g, *g, *g]
fixed: {end: pinned, load_ratio: 1.0}
axes: {stiffness_ratio: [1.0, 2.0]}
"""

RUN = ["run", "col.yaml", "--progress", "none"]
REPAIR = r"run `sweepshell verify --repair results/column\.zarr`"

CASES = [
    # silent loss and damaged metadata: one line naming what and the remedy, nothing written
    Case("chunk-deleted-query", ["query", STORE], 2, r"lost data: critical_load block \[1, 0\] .*" + REPAIR,
         _remove("critical_load/c/1/0")),
    Case("chunk-deleted-export", ["export", STORE, "--format", "csv", "-o", "out.csv"], 2,
         r"critical_load block \[1, 0\] has no chunk.*" + REPAIR, _remove("critical_load/c/1/0")),
    Case("array-deleted-query", ["query", STORE], 2, r"array margin is missing.*" + REPAIR, _remove("margin")),
    Case("array-deleted-run", RUN, 2, r"array margin is missing.*" + REPAIR, _remove("margin")),
    Case("nan-at-trusted-point-query", ["query", STORE, "--format", "csv"], 2,
         r"1 trusted points without a value of critical_load .*verify --repair", _nan_at_trusted_point),
    Case("consolidated-dtype-status", ["status", STORE], 2, r"data_type .*\"float64\".*\"int32\".*" + REPAIR,
         _consolidated_dtype),
    Case("consolidated-dtype-query", ["query", STORE], 2, r"data_type .*" + REPAIR, _consolidated_dtype),
    Case("consolidated-dtype-run", RUN, 2, r"data_type .*" + REPAIR, _consolidated_dtype),
    Case("garbage-status-meta-status", ["status", STORE], 2, r"status/zarr\.json does not parse.*" + REPAIR,
         _write(STORE + "/status/zarr.json", "garbage{{")),
    Case("garbage-status-meta-run", RUN, 2, r"status/zarr\.json does not parse.*" + REPAIR,
         _write(STORE + "/status/zarr.json", "garbage{{")),
    Case("truncated-root-query", ["query", STORE], 2, r"root metadata zarr\.json does not parse.*" + REPAIR,
         lambda w: (w / STORE / "zarr.json").write_text((w / STORE / "zarr.json").read_text()[:2500])),
    Case("truncated-root-run", RUN, 2, r"root metadata zarr\.json does not parse.*" + REPAIR,
         lambda w: (w / STORE / "zarr.json").write_text((w / STORE / "zarr.json").read_text()[:2500])),
    Case("checksum-query", ["query", STORE], 2, r"critical_load block \[1, 0\] does not decode.*" + REPAIR,
         _flip_byte),
    Case("checksum-export", ["export", STORE, "--format", "csv", "-o", "out.csv"], 2,
         r"critical_load block \[1, 0\] does not decode.*" + REPAIR, _flip_byte),
    Case("checksum-report", ["report", STORE, "--out", "r.html"], 2,
         r"critical_load block \[1, 0\] does not decode.*" + REPAIR, _flip_byte),
    # used to hang or exhaust memory
    Case("where-power-tower", ["query", STORE, "--where", "load_ratio > 9**9**9"], 2,
         r"the power 9\*\*3\.8742e\+08 \(beyond ±1e300\) is not allowed", bounded=True),
    Case("where-power-left", ["query", STORE, "--where", "10**10**10 > load_ratio"], 2,
         r"the power 10\*\*1e\+10 \(beyond ±1e300\) is not allowed", bounded=True),
    Case("where-text-times-power", ["query", STORE, "--where", "'a' * 10**9 == regime"], 2,
         r"arithmetic on text or lists is not allowed", bounded=True),
    Case("yaml-alias-bomb", ["run", "bomb.yaml", "--dry-run"], 2,
         r"bomb\.yaml at line 4: anchors and aliases .* are not allowed", _write("bomb.yaml", ALIAS_BOMB),
         bounded=True),
    Case("range-override-1e8", [*RUN, "axes.stiffness_ratio=range(0,100000000)"], 2,
         r"gives 1e\+08 values, above limits\.max_points=20000000", bounded=True),
    Case("range-form-1e8", ["run", "big.yaml", "--dry-run"], 2,
         r"the grid has 100000000 points .* above limits\.max_points",
         _write("big.yaml", SWEEP.replace("[0.1, 1.0, 10.0, 100.0]", "{range: [0, 100000000, 1]}")
                .replace("[0.5, 5.0, 40.0]", "[1.0]")), bounded=True),
    Case("store-axes-claim-1e7-refine", ["refine", STORE, "--levels", "1"], 2,
         r"root metadata zarr\.json is \d+ bytes, above 16000000", _axes_claim(10_000_000), bounded=True),
    Case("store-axes-claim-1e5-merge", ["merge", STORE, STORE, "-o", "results/m.zarr"], 2,
         r"attribute axes_json .* does not match the ledger's axes", _axes_claim(100_000), bounded=True),
    Case("store-path-samples-1e8-refine", ["refine", STORE, "--levels", "1"], 2,
         r"path_sample': 100000000} \(100000000 values per point\)", _settings("path_samples", 100_000_000),
         bounded=True),
    Case("store-work-seconds-1e6-refine", ["refine", STORE, "--levels", "1"], 2,
         r"ask for 1e\+06 s per point", _settings("work_seconds", 1e6), bounded=True),
    Case("store-block-shape-zero-merge", ["merge", STORE, STORE, "-o", "results/m.zarr"], 2,
         r"block_shape=\[0, 0\] is not the ledger's chunk shape \[1, 3\]",
         lambda w: _root_attrs(w, lambda a: a.update(block_shape=[0, 0])), bounded=True),
    Case("store-block-shape-zero-refine", ["refine", STORE, "--levels", "1"], 2,
         r"block_shape=\[0, 0\] is not the ledger's chunk shape",
         lambda w: _root_attrs(w, lambda a: a.update(block_shape=[0, 0])), bounded=True),
    Case("store-axes-infinity", ["status", STORE], 2, r"axes_json does not parse \(non-standard constant Infinity\)",
         lambda w: _root_attrs(w, lambda a: a.update(axes_json=a["axes_json"].replace("0.5", "Infinity", 1)))),
    Case("sweep-settings-path-samples-1e8", [*RUN, "settings.path_samples=100000000"], 2,
         r"100000000 values per point", bounded=True),
    # bad input that used to be accepted or crash
    Case("inf-fixed", ["run", "inf.yaml", "--dry-run"], 2, r"fixed\.load_ratio=inf is not a finite number",
         _write("inf.yaml", SWEEP.replace("fixed: {end: pinned}", "fixed: {end: pinned, load_ratio: .inf}")
                .replace("  load_ratio: [0.5, 5.0, 40.0]\n", ""))),
    Case("nan-axis-override", [*RUN, "axes.load_ratio=[1,nan]"], 2, r"axes\.load_ratio value nan is not a finite"),
    Case("inf-axis-file", ["run", "inf.yaml", "--dry-run"], 2, r"axes\.load_ratio value inf is not a finite",
         _write("inf.yaml", SWEEP.replace("[0.5, 5.0, 40.0]", "[0.5, .inf]"))),
    Case("duplicate-key", ["run", "dup.yaml", "--dry-run"], 2, r"dup\.yaml at line 4: key 'fixed' is given twice",
         _write("dup.yaml", SWEEP.replace("fixed: {end: pinned}\n", "fixed: {end: pinned}\nfixed: {end: weak}\n"))),
    Case("executor-path", [*RUN, "executor=../sweep/x"], 2, r"executor=\.\./sweep/x is not an executor preset"),
    Case("env-interpolation-file", ["run", "env.yaml", "--dry-run"], 2,
         r"description='\$\{oc\.env:HOME\}' uses \$\{\.\.\.\} interpolation",
         _write("env.yaml", SWEEP + "description: ${oc.env:HOME}\n")),
    Case("env-interpolation-override", [*RUN, "fixed.end=${oc.env:HOME}"], 2, r"uses \$\{\.\.\.\} interpolation"),
    Case("interpolation-loop", ["run", "loop.yaml", "--dry-run"], 2, r"uses \$\{\.\.\.\} interpolation",
         _write("loop.yaml", SWEEP + "description: {a: '${description.b}', b: '${description.a}'}\n")),
    Case("interpolation-missing", ["run", "miss.yaml", "--dry-run"], 2, r"uses \$\{\.\.\.\} interpolation",
         _write("miss.yaml", SWEEP + "description: ${nowhere.at_all}\n")),
    Case("store-url-no-slashes", [*RUN, "store.path=s3:bucket/x.zarr"], 2, r"looks like a URL without '//'"),
    Case("store-url-memory", [*RUN, "store.path=memory://x.zarr", "executor=local"], 2,
         r"memory:// lives inside one process"),
    Case("store-url-file-proc", [*RUN, "store.path=file:///proc/x.zarr"], 2, r"is under /proc, a system folder"),
    Case("store-url-http", [*RUN, "store.path=https://example.org/x.zarr"], 2, r"https:// is read-only"),
    Case("store-url-bucket-only", [*RUN, "store.path=s3://bucket"], 2, r"names a bucket, not a store inside it"),
    Case("store-url-unknown", [*RUN, "store.path=nosuchfs://b/x.zarr"], 2, r"no filesystem is known for nosuchfs://"),
    Case("store-options-on-folder", [*RUN, "store.options.anon=true"], 2, r"store\.options apply to object-store"),
    Case("store-under-proc", [*RUN, "store.path=/proc/x.zarr"], 2, r"is under /proc, a system folder"),
    Case("store-inside-file", [*RUN, "store.path=col.yaml/x.zarr"], 2, r"lies inside the file .*col\.yaml"),
    Case("store-is-file", [*RUN, "store.path=col.yaml"], 2, r"is a file; choose another path"),
    Case("merge-output-url", ["merge", STORE, STORE, "-o", "https://example.org/m.zarr"], 2,
         r"-o='https://example\.org/m\.zarr': https:// is read-only"),
    Case("export-output-in-proc", ["export", STORE, "--format", "csv", "-o", "/proc/x.csv"], 2,
         r"No such file or directory .*check the path"),
    Case("workers-1e9", [*RUN, "executor.workers=1000000000"], 2, r"executor\.workers=1000000000 is more than 512"),
    Case("range-override-tiny-step", [*RUN, "axes.load_ratio=range(0,1,1e-300)"], 2, r"gives 1e\+300 values",
         bounded=True),
    Case("unreachable-scheduler", [*RUN, "executor=distributed", "executor.address=tcp://127.0.0.1:9",
                                   "store.path=results/new.zarr"], 2, r"no scheduler answers", bounded=True),
    Case("where-bitand-numbers", ["query", STORE, "--where", "load_ratio > 1 & 2"], 2,
         r"& or \| between numbers \(they join conditions\) is not allowed"),
]


def _snapshot(folder: Path) -> dict[str, str]:
    out = {}
    for dirpath, dirnames, files in os.walk(folder):
        for d in dirnames:
            out[os.path.relpath(os.path.join(dirpath, d), folder) + "/"] = ""
        for f in files:
            full = os.path.join(dirpath, f)
            out[os.path.relpath(full, folder)] = hashlib.sha256(Path(full).read_bytes()).hexdigest()
    return out


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_hostile_input_is_one_line_and_writes_nothing(case, store_template, workdir, capfd):
    shutil.copytree(store_template, workdir / STORE)
    (workdir / "col.yaml").write_text(SWEEP)
    if case.setup is not None:
        case.setup(workdir)
    before = _snapshot(workdir)
    capfd.readouterr()
    if case.bounded:
        tracemalloc.start()
    t0 = time.perf_counter()
    try:
        code = main(case.argv)
    finally:
        seconds = time.perf_counter() - t0
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
    out, err = capfd.readouterr()
    assert "Traceback" not in out + err
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("sweepshell: error: ")
    assert re.search(case.message, lines[0]), lines[0]
    assert code == case.code
    assert _snapshot(workdir) == before
    if case.bounded:
        assert seconds < HANG_SECONDS, f"{case.id}: {seconds:.1f} s"
        assert peak < HANG_PEAK_BYTES, f"{case.id}: {peak / 1e6:.0f} MB"


def test_and_or_symbols_select_what_the_words_select(store_template, workdir, capsys):
    shutil.copytree(store_template, workdir / STORE)
    answers = {}
    for expr in ("stiffness_ratio > 1 and load_ratio < 10", "stiffness_ratio > 1 & load_ratio < 10",
                 "stiffness_ratio > 1 or load_ratio < 1", "stiffness_ratio > 1 | load_ratio < 1",
                 "not stiffness_ratio > 1", "~(stiffness_ratio > 1)"):
        assert main(["query", STORE, "--where", expr, "--format", "json", "--fields", "critical_load"]) == 0
        answers[expr] = json.loads(capsys.readouterr().out)
    assert answers["stiffness_ratio > 1 & load_ratio < 10"] == answers["stiffness_ratio > 1 and load_ratio < 10"]
    assert len(answers["stiffness_ratio > 1 and load_ratio < 10"]) == 4  # eta 10, 100 x load 0.5, 5
    assert answers["stiffness_ratio > 1 | load_ratio < 1"] == answers["stiffness_ratio > 1 or load_ratio < 1"]
    assert len(answers["stiffness_ratio > 1 or load_ratio < 1"]) == 8
    assert answers["~(stiffness_ratio > 1)"] == answers["not stiffness_ratio > 1"]


def test_unknown_status_codes_are_counted_not_dropped(store_template, workdir, capsys):
    shutil.copytree(store_template, workdir / STORE)
    _unknown_status(workdir)
    assert main(["status", STORE, "--json"]) == 0
    info = json.loads(capsys.readouterr().out)
    assert sum(info["counts"].values()) == info["total"] == 12
    assert info["counts"]["unknown"] == 3 and info["complete"] is False
    assert info["complete_fraction"] == pytest.approx(9 / 12)
    assert main(["status", STORE]) == 0
    assert "3 points hold status codes this sweepshell does not know" in capsys.readouterr().out


def test_status_counts_off_grid_points(store_template, workdir, capsys):
    shutil.copytree(store_template, workdir / STORE)
    assert main(["refine", STORE, "--levels", "1"]) == 0
    capsys.readouterr()
    assert main(["status", STORE, "--json"]) == 0
    off = json.loads(capsys.readouterr().out)["off_grid_points"]
    assert sum(off.values()) > 0 and set(off) <= {"ok", "no_instability", "outside_validity"}
    assert main(["status", STORE]) == 0
    assert f"off-grid points (refine, boundary): {sum(off.values())}" in capsys.readouterr().out


def test_leftovers_are_reported_and_cleaned(store_template, workdir, capsys):
    import socket

    shutil.copytree(store_template, workdir / STORE)
    (workdir / "col.yaml").write_text(SWEEP)
    dead_pid = 2 ** 22 + 12345  # above the default pid_max: no such process
    claims = workdir / STORE / ".claims"
    claims.mkdir()
    (claims / "block-0-0.claim").write_text(json.dumps({"runner": f"{socket.gethostname()}:{dead_pid}:ab12cd34",
                                                         "claimed": 0}))
    tmp = workdir / "results" / f"m.zarr.sweepshell-tmp-{dead_pid}"
    shutil.copytree(store_template, tmp)
    assert main(["catalog", "results", "--no-index"]) == 0
    out = capsys.readouterr().out
    assert f"m.zarr.sweepshell-tmp-{dead_pid}: left over by a killed process" in out
    assert "column.zarr/.claims/block-0-0.claim: left over by a killed process" in out
    # a run that finds the store complete removes the dead runner's claims
    assert main(RUN) == 0
    assert "nothing to compute" in capsys.readouterr().out and not claims.exists()
    # a merge into the same output removes the killed merge's half-built store
    assert main(["merge", STORE, STORE, "-o", "results/m.zarr"]) == 0
    assert not tmp.exists() and (workdir / "results" / "m.zarr" / "zarr.json").is_file()
    assert main(["catalog", "results", "--no-index"]) == 0
    assert "left over" not in capsys.readouterr().out


def test_the_console_entry_prints_no_traceback_either(store_template, workdir):
    """The same refusals through ``python -m sweepshell`` (the real process, its exit code and stderr)."""
    import subprocess
    import sys

    shutil.copytree(store_template, workdir / STORE)
    _flip_byte(workdir)
    (workdir / "bomb.yaml").write_text(ALIAS_BOMB)
    for argv, fragment in ((["query", STORE], "critical_load block [1, 0] does not decode"),
                           (["run", "bomb.yaml"], "anchors and aliases")):
        done = subprocess.run([sys.executable, "-m", "sweepshell", *argv], check=False, capture_output=True,
                              text=True, cwd=workdir, timeout=120)
        assert done.returncode == 2 and "Traceback" not in done.stderr + done.stdout
        assert len(done.stderr.strip().splitlines()) == 1 and fragment in done.stderr
