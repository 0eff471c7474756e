"""Fixed cost of `sweepshell run` on small sweeps (issue: speed), against `python -c "import sweepshell"`.

Prints, each measured in this run (median of ``--repeat`` fresh processes, new store each time, reuse off):

1. the baseline: wall time of ``python -c "import sweepshell"``;
2. wall time of ``python -m sweepshell run`` on a 200-point shallow_cap pressure sweep and a 200-point
   winkler_column sweep, with ``executor=local`` (worker processes) and the default ``auto`` (in this process
   for small work), as seconds above the baseline and as a ratio to it; beside it the CPU time of the
   process (user + system, its children included), which a shared machine's load inflates far less than
   wall time, and the fixed cost: the run's time above the baseline minus the model's own work (the same
   points solved in this warm process, measured in the same run; wall from wall, CPU from CPU);
3. where the time goes: import of each heavy library in a fresh process, starting + closing a local
   cluster of 2 worker processes (start_client), and numba's own floor for a model with compiled kernels
   (its import, and the target context its first cached kernel load initialises), in CPU seconds.

Usage: python benchmarks/bench_fixed_cost.py [--repeat 3] [--skip-breakdown]
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

SWEEPS = {
    "shallow_cap": """\
        name: fixed_cap
        model: shallow_cap
        axes:
          shell_parameter: {linspace: [4, 20, 200]}
        """,
    "winkler_column": """\
        name: fixed_column
        model: winkler_column
        fixed: {end: pinned}
        axes:
          stiffness_ratio: {logspace: [-1, 4, 20]}
          load_ratio: {linspace: [0.5, 80, 10]}
        """,
}


def _wall(cmd: list[str], cwd: Path) -> float:
    return _times(cmd, cwd)[0]


def _times(cmd: list[str], cwd: Path) -> tuple[float, float]:
    """Wall time and CPU time (user + system of the process and its children) of one command."""
    env = dict(os.environ, PYTHONPATH=f"{REPO}{os.pathsep}{os.environ.get('PYTHONPATH', '')}")
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    proc = subprocess.run(cmd, check=False, cwd=cwd, env=env, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if proc.returncode != 0:
        raise SystemExit(f"{' '.join(cmd)} failed: {proc.stderr.strip()[-400:]}")
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def _median(cmds: list[list[str]], cwd: Path) -> tuple[float, float]:
    runs = [_times(c, cwd) for c in cmds]
    return statistics.median(r[0] for r in runs), statistics.median(r[1] for r in runs)


def _model_seconds(sweep: Path) -> tuple[float, float]:
    """The model's own work for the sweep's points, solved in this (warm) process: median wall and CPU of three."""
    from sweepshell.config.loader import load_plan
    from sweepshell.engine.worker import build_block_inputs, solve_points
    from sweepshell.models import make_model

    plan = load_plan(str(sweep), [], config_dir=str(REPO / "configs"))
    model = make_model(plan.model, plan.settings)
    inputs = build_block_inputs(model, plan.axis_names, [a.to_array() for a in plan.axes], plan.fixed)
    solve_points(model, inputs)  # loads compiled kernels
    runs = []
    for _ in range(3):
        t0, c0 = time.perf_counter(), time.process_time()
        solve_points(model, inputs)
        runs.append((time.perf_counter() - t0, time.process_time() - c0))
    return statistics.median(r[0] for r in runs), statistics.median(r[1] for r in runs)


def bench_runs(folder: Path, repeat: int) -> None:
    py = sys.executable
    base, base_cpu = _median([[py, "-c", "import sweepshell"]] * repeat, folder)
    print(f"[baseline] python -c 'import sweepshell': {base:.2f} s wall, {base_cpu:.2f} s CPU")
    for model, text in SWEEPS.items():
        sweep = folder / f"{model}.yaml"
        sweep.write_text(textwrap.dedent(text))
        # one untimed run compiles/loads the model's kernels into this worktree's cache
        _wall([py, "-m", "sweepshell", "run", str(sweep), "--progress", "none", "reuse=false",
               "--config-dir", str(REPO / "configs"), f"store.path={folder / f'warm-{model}.zarr'}"], folder)
        work, work_cpu = _model_seconds(sweep)
        print(f"[model] {model} 200 points solved in a warm process: {work:.2f} s wall, {work_cpu:.2f} s CPU")
        for executor in ("local", "auto"):
            cmds = [[py, "-m", "sweepshell", "run", str(sweep), "--progress", "none", "reuse=false",
                     "--config-dir", str(REPO / "configs"), f"executor={executor}",
                     f"store.path={folder / f'{model}-{executor}-{i}.zarr'}"] for i in range(repeat)]
            wall, cpu = _median(cmds, folder)
            print(f"[run] {model} 200 points, executor={executor}: {wall:.2f} s wall = baseline + {wall - base:.2f} s "
                  f"({wall / base:.1f}x the import baseline), fixed cost {wall - base - work:.2f} s wall, "
                  f"{cpu - base_cpu - work_cpu:.2f} s CPU (target: <= 1 s for small work)")


def bench_breakdown(folder: Path) -> None:
    py = sys.executable
    bare = _wall([py, "-c", "pass"], folder)
    for lib in ("numpy", "zarr", "xarray", "dask.array", "distributed", "numba", "hydra", "scipy"):
        t = _wall([py, "-c", f"import {lib}"], folder)
        print(f"[import] {lib}: {t - bare:.2f} s above `python -c pass` ({bare:.2f} s)")
    code = ("import time; t=time.perf_counter(); "
            "from sweepshell.engine.executors import start_client; from sweepshell.plan import ExecutorSpec; "
            "t1=time.perf_counter(); c,k=start_client(ExecutorSpec('local', 2)); t2=time.perf_counter(); "
            "c.close(); k.close(); t3=time.perf_counter(); "
            "print(f'{t1-t:.2f} {t2-t1:.2f} {t3-t2:.2f}')")
    env = dict(os.environ, PYTHONPATH=f"{REPO}{os.pathsep}{os.environ.get('PYTHONPATH', '')}")
    out = subprocess.run([py, "-c", code], cwd=folder, env=env, capture_output=True, text=True, check=True)
    imp, start, close = (float(x) for x in out.stdout.split())
    print(f"[cluster] import runner {imp:.2f} s, start 2 local worker processes {start:.2f} s, close {close:.2f} s")
    # numba's own floor for a model with compiled kernels, before any kernel of ours is loaded: its import, and
    # the target context every first cached load initialises (numba imports its registries, scipy.linalg among
    # them); CPU seconds, which the machine's load inflates far less than wall time
    code = ("import time; c=time.process_time(); import numba; c1=time.process_time(); "
            "from numba.core.registry import cpu_target; cpu_target.target_context.refresh(); "
            "print(f'{c1-c:.2f} {time.process_time()-c1:.2f}')")
    out = subprocess.run([py, "-c", code], cwd=folder, env=env, capture_output=True, text=True, check=True)
    imp, refresh = (float(x) for x in out.stdout.split())
    print(f"[numba] import {imp:.2f} s CPU, target context of the first cached kernel load {refresh:.2f} s CPU")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--skip-breakdown", action="store_true")
    args = parser.parse_args()
    print(f"load average at start: {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        bench_runs(folder, args.repeat)
        if not args.skip_breakdown:
            bench_breakdown(folder)
    print(f"load average at end: {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
