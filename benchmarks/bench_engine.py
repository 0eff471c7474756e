"""Engine speed and size figures (issue: engine, store and command line).

Prints, each against a baseline measured in the same run:

1. engine overhead: a model costing ~1 ms per point swept over N points on 2 local worker processes; the fraction
   of wall time spent inside the model (ideal: model seconds / workers / wall seconds = 1);
2. a 10^6-point store: template creation and open times (baseline: writing the same number of raw bytes with
   numpy), and bytes on disk of a filled all-float64 store with 5 outputs against the raw float bytes;
3. cold start of `sweepshell --help` and `sweepshell status` (baseline: `python -c pass`).

Usage: python benchmarks/bench_engine.py [--points 100000] [--skip-overhead]
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

import numpy as np

REPO = Path(__file__).resolve().parents[1]


def _sweep_file(folder: Path, points: int, work: float, path_samples: int, name: str) -> Path:
    n_eta = round(points ** 0.5)
    n_load = max(1, points // n_eta)
    text = f"""\
    name: {name}
    model: winkler_column
    settings: {{work_seconds: {work}, path_samples: {path_samples}}}
    fixed: {{end: pinned}}
    axes:
      stiffness_ratio: {{logspace: [-1, 4, {n_eta}]}}
      load_ratio: {{linspace: [0.5, 80, {n_load}]}}
    """
    p = folder / f"{name}.yaml"
    p.write_text(textwrap.dedent(text))
    return p


def bench_overhead(folder: Path, points: int) -> None:
    from sweepshell import run_sweep

    sweep = _sweep_file(folder, points, 1e-3, 2, "overhead")
    t0 = time.perf_counter()
    summary = run_sweep(str(sweep), ["executor=local", "executor.workers=2", f"store.path={folder / 'o.zarr'}"])
    wall = time.perf_counter() - t0
    fraction = summary.model_seconds / 2 / wall
    print(f"[overhead] {summary.total} points at ~1 ms each on 2 worker processes: wall {wall:.1f} s, "
          f"model {summary.model_seconds:.1f} s summed -> {fraction:.1%} of wall time inside the model "
          f"(target >= 90%)")


def bench_store(folder: Path) -> None:
    import xarray as xr

    from sweepshell.config.loader import load_plan
    from sweepshell.engine.runner import run_plan
    from sweepshell.models import make_model
    from sweepshell.plan import choose_block_shape
    from sweepshell.store.writer import create_store

    os.environ["SWEEPSHELL_CONFIG_DIR"] = str(REPO / "configs")
    sweep = _sweep_file(folder, 1_000_000, 0.0, 2, "million")
    plan = load_plan(str(sweep), [f"store.path={folder / 'm.zarr'}", "block.points=50000", "executor=local",
                                  "executor.workers=2"])
    model = make_model(plan.model, plan.settings)
    raw = np.random.default_rng(0).random(plan.n_points * 5)
    t0 = time.perf_counter()
    np.save(folder / "raw.npy", raw)
    t_raw = time.perf_counter() - t0
    t0 = time.perf_counter()
    create_store(plan, model, choose_block_shape(plan.shape, plan.block_points))
    t_template = time.perf_counter() - t0
    t0 = time.perf_counter()
    ds = xr.open_zarr(folder / "m.zarr")
    t_open = time.perf_counter() - t0
    print(f"[store] 10^6-point template created in {t_template:.2f} s (target < 5 s; raw numpy write of the same "
          f"{raw.nbytes / 1e6:.0f} MB: {t_raw:.2f} s, ratio {t_template / t_raw:.1f}x), opened in {t_open:.3f} s "
          f"(target < 1 s); {len(ds.data_vars)} variables")
    t0 = time.perf_counter()
    summary = run_plan(plan)
    t_fill = time.perf_counter() - t0
    size = sum(f.stat().st_size for f in (folder / "m.zarr").rglob("*") if f.is_file())
    raw_bytes = summary.total * 5 * 8
    print(f"[store] filled {summary.total} points x 5 float64 outputs in {t_fill:.1f} s: {size / 1e6:.1f} MB on "
          f"disk vs {raw_bytes / 1e6:.1f} MB raw floats -> {size / raw_bytes:.2f}x (target < 1.5x; includes "
          "status, regime, coordinates)")


def bench_cold_start(folder: Path) -> None:
    exe = [sys.executable, "-m", "sweepshell"]

    def timed(cmd: list[str]) -> float:
        best = float("inf")
        for _ in range(3):
            t0 = time.perf_counter()
            subprocess.run(cmd, capture_output=True, check=False)
            best = min(best, time.perf_counter() - t0)
        return best

    base = timed([sys.executable, "-c", "pass"])
    t_help = timed([*exe, "--help"])
    store = folder / "m.zarr" if (folder / "m.zarr").exists() else folder / "o.zarr"
    t_status = timed([*exe, "status", str(store)])
    print(f"[cold start] python -c pass {base:.2f} s; sweepshell --help {t_help:.2f} s ({t_help / base:.1f}x); "
          f"sweepshell status (10^6 points) {t_status:.2f} s ({t_status / base:.1f}x) (targets < 1.5 s)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=100_000)
    parser.add_argument("--skip-overhead", action="store_true")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        if not args.skip_overhead:
            bench_overhead(folder, args.points)
        bench_store(folder)
        bench_cold_start(folder)


if __name__ == "__main__":
    main()
