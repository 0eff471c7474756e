"""Two local workers against what two independent processes reach on this machine (issue: speed).

A 2-core machine shared with other work rarely runs two CPU-bound processes at twice the speed of
one. This benchmark measures that limit and the 2-worker sweep in the same run, on the same model
work (shallow_cap pressure points with the full analysis, the default settings):

1. the limit: the points solved by one process, then the same points split between two processes
   started together (each loads its kernels and solves a warm-up point first, then waits for a
   common start signal); limit = time of one / wall time of the two;
2. the sweep: ``run_sweep`` with ``executor=local`` and 1 and 2 worker processes (new store each,
   reuse off, cluster start included); sweep ratio = wall of 1 worker / wall of 2 workers, and the
   same with the cluster start (measured beside it) taken off both;
3. the sweep ratio as a fraction of the limit (1.0: two workers reach what two processes reach);
4. the CPU seconds of each sweep, its worker processes included: on a machine whose load changes
   during the run these stay meaningful when the wall-time ratios do not; their difference is what a
   second worker process costs (its imports, kernel loading and operator caches).

Runs alternate (limit, sweeps, limit, sweeps ...) ``--repeat`` times and the medians are printed,
since other processes' load changes during the run. Prints the load average at start and end.

Usage: python benchmarks/bench_two_workers.py [--points 600] [--repeat 2]
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]

_SOLVER = """\
import sys, time
from pathlib import Path
import numpy as np
from sweepshell.models import make_model
from sweepshell.engine.worker import build_block_inputs

lo, hi, folder, tag = float(sys.argv[1]), float(sys.argv[2]), Path(sys.argv[3]), sys.argv[4]
count = int(sys.argv[5])
model = make_model("shallow_cap", {})
fixed = {p.name: p.default for p in model.parameters}
lam = np.linspace(lo, hi, count)
model.solve_batch(build_block_inputs(model, ["shell_parameter"], [lam[:1]], fixed))  # kernels loaded
(folder / f"ready-{tag}").touch()
while not (folder / "go").exists():
    time.sleep(0.002)
t0 = time.perf_counter()
for start in range(0, count, 25):  # blocks of 25 points, as a sweep's blocks
    model.solve_batch(build_block_inputs(model, ["shell_parameter"], [lam[start:start + 25]], fixed))
print(time.perf_counter() - t0)
"""


def _env() -> dict[str, str]:
    return dict(os.environ, PYTHONPATH=f"{REPO}{os.pathsep}{os.environ.get('PYTHONPATH', '')}",
                OPENBLAS_NUM_THREADS="1")


def _solve_together(folder: Path, parts: list[tuple[float, float, int]]) -> float:
    """Start one solver process per part, release them together; return the wall time of all."""
    for f in folder.glob("ready-*"):
        f.unlink()
    (folder / "go").unlink(missing_ok=True)
    procs = [subprocess.Popen([sys.executable, "-c", _SOLVER, str(lo), str(hi), str(folder), str(i), str(n)],
                              env=_env(), stdout=subprocess.PIPE, text=True)
             for i, (lo, hi, n) in enumerate(parts)]
    while len(list(folder.glob("ready-*"))) < len(parts):
        if any(p.poll() not in (None, 0) for p in procs):
            raise SystemExit("a solver process failed")
        time.sleep(0.01)
    t0 = time.perf_counter()
    (folder / "go").touch()
    for p in procs:
        p.wait()
    return time.perf_counter() - t0


def measure_limit(folder: Path, points: int) -> tuple[float, float]:
    """Seconds for ``points`` points in one process, and for the halves in two processes at once."""
    lo, hi = 4.0, 20.0
    one = _solve_together(folder, [(lo, hi, points)])
    mid = lo + (hi - lo) * (points // 2) / points
    two = _solve_together(folder, [(lo, mid, points // 2), (mid, hi, points - points // 2)])
    return one, two


def _cpu_children() -> float:
    use = resource.getrusage(resource.RUSAGE_CHILDREN)
    return use.ru_utime + use.ru_stime


def measure_sweeps(folder: Path, points: int, run: int) -> tuple[float, float, float, list[float]]:
    """Wall seconds of the sweep on 1 and 2 local worker processes, of starting + closing 2 workers, and
    the CPU seconds of each sweep (its process and the worker processes it started)."""
    code = textwrap.dedent("""\
        import sys, time
        from sweepshell import run_sweep
        t0 = time.perf_counter()
        run_sweep(sys.argv[1], ["executor=local", "executor.workers=" + sys.argv[2], "reuse=false",
                                "store.path=" + sys.argv[3]])
        print(time.perf_counter() - t0)
        """)
    sweep = folder / "two_workers.yaml"
    sweep.write_text(textwrap.dedent(f"""\
        name: two_workers
        model: shallow_cap
        axes:
          shell_parameter: {{linspace: [4, 20, {points}]}}
        block: {{points: 25}}
        """))
    walls, cpus = [], []
    for workers in (1, 2):
        cpu0 = _cpu_children()
        out = subprocess.run([sys.executable, "-c", code, str(sweep), str(workers),
                              str(folder / f"s{run}-{workers}.zarr")], env=_env(), cwd=folder, check=True,
                             capture_output=True, text=True)
        walls.append(float(out.stdout.split()[-1]))
        cpus.append(_cpu_children() - cpu0)
    start = ("import time; from sweepshell.engine.executors import start_client; from sweepshell.plan import "
             "ExecutorSpec; t=time.perf_counter(); c,k=start_client(ExecutorSpec('local', 2)); c.close(); k.close(); "
             "print(time.perf_counter()-t)")
    out = subprocess.run([sys.executable, "-c", start], env=_env(), cwd=folder, check=True, capture_output=True,
                         text=True)
    return walls[0], walls[1], float(out.stdout.split()[-1]), cpus


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=600)
    parser.add_argument("--repeat", type=int, default=2)
    args = parser.parse_args()
    print(f"load average at start: {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    limits, ratios, net_ratios = [], [], []
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        for run in range(args.repeat):
            one, two = measure_limit(folder, args.points)
            w1, w2, cluster, cpus = measure_sweeps(folder, args.points, run)
            limits.append(one / two)
            ratios.append(w1 / w2)
            net_ratios.append((w1 - cluster) / max(w2 - cluster, 1e-9))
            print(f"[run {run + 1}] limit: 1 process {one:.2f} s, 2 processes {two:.2f} s -> {one / two:.2f}x; "
                  f"sweep: 1 worker {w1:.2f} s, 2 workers {w2:.2f} s -> {w1 / w2:.2f}x "
                  f"({net_ratios[-1]:.2f}x without the {cluster:.2f} s cluster start); CPU of the sweeps "
                  f"{cpus[0]:.1f} s and {cpus[1]:.1f} s (the difference: what the second worker process adds)")
    limit, ratio, net = (statistics.median(v) for v in (limits, ratios, net_ratios))
    print(f"[result] {args.points} points: two processes reach {limit:.2f}x one; two workers {ratio:.2f}x one worker "
          f"= {ratio / limit:.0%} of the limit ({net / limit:.0%} without the cluster start)")
    print(f"load average at end: {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
