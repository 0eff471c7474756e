"""Query, map and boundary on a 10^6-point store: each answer should take under 3 s.

Builds a 1000 × 1000 store of the analytic ``winkler_column`` model (zero work per point),
then times each command twice: in this process (libraries already imported: the answer
itself) and as a fresh ``sweepshell`` process (what a user waits for, start-up included).
The baseline measured in the same run is reading the store's status ledger alone.

    /work/venv/bin/python benchmarks/bench_query.py [--keep DIR]
"""

from __future__ import annotations

import argparse
import contextlib
import io
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
SWEEP = """\
name: million
model: winkler_column
fixed: {end: pinned}
axes:
  stiffness_ratio: {logspace: [-1, 3, 1000]}
  load_ratio: {linspace: [0.5, 40, 1000]}
executor: {kind: threads, workers: 2}
block: {points: 250000}
"""

COMMANDS = {
    "query": ["query", "{store}", "--where", 'stiffness_ratio > 100 and regime == "buckled" and load_ratio < 30',
              "--fields", "critical_load,regime", "--format", "csv"],
    "map": ["map", "{store}", "--x", "stiffness_ratio", "--y", "load_ratio", "--contour", "critical_load",
            "--out", "{folder}/map.png"],
    "boundary": ["boundary", "{store}", "--between", "stable", "buckled", "--bisections", "6", "--no-record"],
}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--keep", help="build the store in this folder and keep it")
    args = parser.parse_args()
    folder = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="bench-query-"))
    folder.mkdir(parents=True, exist_ok=True)
    store = folder / "million.zarr"
    os.environ.setdefault("SWEEPSHELL_CONFIG_DIR", str(REPO / "configs"))
    os.environ.setdefault("MPLBACKEND", "Agg")
    from sweepshell import run_sweep
    from sweepshell.cli.main import main as cli
    from sweepshell.store.reader import read_ledger

    if not store.exists():
        (folder / "million.yaml").write_text(SWEEP)
        t0 = time.perf_counter()
        summary = run_sweep(str(folder / "million.yaml"), [f"store.path={store}"])
        print(f"built {summary.total} points in {time.perf_counter() - t0:.1f} s -> {store}")
    t0 = time.perf_counter()
    read_ledger(store)
    baseline = time.perf_counter() - t0
    print(f"baseline: read the 10^6-point ledger in {baseline:.3f} s")
    print("times in s; 'first' includes importing pandas/xarray/matplotlib in this process, 'best of 3' is the "
          "answer itself, 'fresh process' is a new `sweepshell` (interpreter start-up and imports included)")
    print(f"{'command':<10} {'first':>7} {'best of 3':>10} {'cpu':>6} {'fresh process':>14} {'x baseline':>11}")
    worst = 0.0
    for name, template in COMMANDS.items():
        argv = [a.format(store=store, folder=folder) for a in template]
        walls, cpus = [], []
        for _ in range(4):
            sink = io.StringIO()
            t0, c0 = time.perf_counter(), time.process_time()
            with contextlib.redirect_stdout(sink), contextlib.redirect_stderr(io.StringIO()):
                code = cli(argv)
            walls.append(time.perf_counter() - t0)
            cpus.append(time.process_time() - c0)
        t0 = time.perf_counter()
        proc = subprocess.run([sys.executable, "-m", "sweepshell", *argv], capture_output=True, text=True,
                              check=False)
        cold = time.perf_counter() - t0
        if code != 0 or proc.returncode != 0:
            print(f"{name}: failed ({code}, {proc.returncode}): {proc.stderr.strip()}")
            return 1
        best = min(walls[1:])
        worst = max(worst, best)
        lines = len(sink.getvalue().splitlines())
        print(f"{name:<10} {walls[0]:>7.2f} {best:>10.2f} {min(cpus[1:]):>6.2f} {cold:>14.2f} "
              f"{best / baseline:>11.0f}  ({lines} lines of output)")
    print(f"slowest answer (best of 3): {worst:.2f} s ({'meets' if worst < 3 else 'MISSES'} the 3 s target); "
          f"load average now {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
