"""Throughput of the ways to run one sweep (several runners on one store, scale-out).

Prints, measured in the same run on the same 2-axis sweep of a model costing ~``--work`` seconds per point:

1. 2 local worker processes (the embedded default) vs a 2-worker dask.distributed LocalCluster reached by
   address (``executor=distributed``): the throughput ratio (expect within 20 %);
2. one runner with 1 worker vs two concurrent runners with 1 worker each on the same store: the wall-time ratio
   (expect about 0.5).

Usage: python benchmarks/bench_shared_runs.py [--points 4000] [--work 0.005]
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]


def _sweep(folder: Path, points: int, work: float) -> Path:
    n = round(points ** 0.5)
    path = folder / "team.yaml"
    path.write_text(textwrap.dedent(f"""\
        name: team
        model: winkler_column
        settings: {{work_seconds: {work}}}
        fixed: {{end: pinned}}
        axes:
          stiffness_ratio: {{logspace: [-1, 3, {n}]}}
          load_ratio: {{linspace: [0.5, 40, {n}]}}
        reuse: false
        """))
    return path


def _run(args: list[str], cwd: Path) -> subprocess.Popen[bytes]:
    env = dict(os.environ, SWEEPSHELL_CONFIG_DIR=str(REPO / "configs"))
    return subprocess.Popen([sys.executable, "-m", "sweepshell", "run", *args, "--progress", "none"], cwd=cwd,
                            env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)


def _timed(procs: list[subprocess.Popen[bytes]]) -> float:
    t0 = time.perf_counter()
    for p in procs:
        _, err = p.communicate()
        if p.returncode != 0:
            raise SystemExit(err.decode())
    return time.perf_counter() - t0


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=4000)
    parser.add_argument("--work", type=float, default=0.005)
    args = parser.parse_args()
    from distributed import LocalCluster

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        sweep = str(_sweep(folder, args.points, args.work))
        n = round(args.points ** 0.5) ** 2
        t_local = _timed([_run([sweep, "executor.workers=2", "store.path=a.zarr"], folder)])
        with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0") as cluster:
            t_dist = _timed([_run([sweep, "executor=distributed", f"executor.address={cluster.scheduler_address}",
                                   "store.path=b.zarr"], folder)])
        print(f"[executors] {n} points x {args.work * 1e3:.1f} ms: local 2 workers {t_local:.1f} s "
              f"({n / t_local:.0f} points/s), distributed 2-worker LocalCluster {t_dist:.1f} s "
              f"({n / t_dist:.0f} points/s); throughput ratio distributed/local {t_local / t_dist:.2f}")
        t_one = _timed([_run([sweep, "executor.workers=1", "store.path=c.zarr"], folder)])
        t_two = _timed([_run([sweep, "executor.workers=1", "store.path=d.zarr"], folder),
                        _run([sweep, "executor.workers=1", "store.path=d.zarr"], folder)])
        print(f"[runners] one runner (1 worker) {t_one:.1f} s; two concurrent runners (1 worker each) on one "
              f"store {t_two:.1f} s; ratio {t_two / t_one:.2f} (ideal 0.5 on 2 free cores)")


if __name__ == "__main__":
    main()
