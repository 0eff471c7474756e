"""Adaptive refinement against a uniform fine grid: evaluations spent and boundary accuracy.

Two-axis map of the analytic ``winkler_column`` model (η log-spaced over 4 decades, load
ratio linear over [0.5, 40]), whose stable/buckled boundary is known in closed form,
load_ratio = min_m (m² + η/m²) (Timoshenko & Gere 1961). A 17 × 17 coarse grid refined by
L levels is compared with the uniform grid of the same finest spacing, (16·2^L + 1)² points.

For both, the boundary estimates are the midpoints of the finest edges joining a stable and
a buckled point; each estimate's error is its distance to the closed-form boundary along its
edge, in units of the fine spacing (≤ 0.5 by construction when the boundary is found). The
"discrepancy" is the largest distance between the two sets of estimates (Hausdorff, fine
spacings). Prints evaluations, the ratio, errors and discrepancy.

    /work/venv/bin/python benchmarks/bench_refine.py [--levels 5]
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
SWEEP = """\
name: {name}
model: winkler_column
fixed: {{end: pinned}}
axes:
  stiffness_ratio: {{logspace: [-1, 3, {n}]}}
  load_ratio: {{linspace: [0.5, 40, {n}]}}
executor: {{kind: threads, workers: 2}}
block: {{points: 100000}}
"""


def boundary_errors(crossings: np.ndarray, du: float, dv: float) -> np.ndarray:
    """Distance of each crossing estimate to the closed-form boundary along its edge, in fine spacings."""
    from scipy.optimize import brentq

    from sweepshell.models.winkler_column.model import winkler_column_critical

    u, v = crossings[:, 0], crossings[:, 1]
    lattice_v = np.isclose((v - 0.5) / dv, np.round((v - 0.5) / dv), atol=1e-6)
    errors = np.empty(len(u))
    along_v = ~lattice_v  # a vertical (load) edge: v is a half step
    errors[along_v] = np.abs(v[along_v] - winkler_column_critical(10 ** u[along_v])[0]) / dv
    for k in np.flatnonzero(lattice_v):  # a horizontal (η) edge: solve P_cr(η*) = v for η*

        def gap(x: float, load: float = v[k]) -> float:
            return float(winkler_column_critical(np.array([10 ** x]))[0][0] - load)

        lo, hi = u[k] - du, u[k] + du
        errors[k] = abs(brentq(gap, lo, hi) - u[k]) / du if gap(lo) * gap(hi) < 0 else np.inf
    return errors


def hausdorff(a: np.ndarray, b: np.ndarray, scale: np.ndarray) -> float:
    from scipy.spatial import cKDTree

    a, b = a / scale, b / scale
    return float(max(cKDTree(b).query(a)[0].max(), cKDTree(a).query(b)[0].max()))


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--levels", type=int, default=5)
    parser.add_argument("--coarse", type=int, default=17, help="coarse points per axis")
    args = parser.parse_args()
    os.environ.setdefault("SWEEPSHELL_CONFIG_DIR", str(REPO / "configs"))
    from sweepshell import open_sweep, run_sweep
    from sweepshell.engine.refine import grid_crossings, node_crossings, refine_store
    from sweepshell.query.boundary import slice_codes

    folder = Path(tempfile.mkdtemp(prefix="bench-refine-"))
    fine_n = (args.coarse - 1) * 2 ** args.levels + 1
    stores = {}
    for name, n in (("coarse", args.coarse), ("uniform", fine_n)):
        (folder / f"{name}.yaml").write_text(SWEEP.format(name=name, n=n))
        t0 = time.perf_counter()
        run_sweep(str(folder / f"{name}.yaml"), [f"store.path={folder / name}.zarr"])
        stores[name] = (folder / f"{name}.zarr", time.perf_counter() - t0)
    t0 = time.perf_counter()
    summary = refine_store(stores["coarse"][0], levels=args.levels)
    refine_seconds = time.perf_counter() - t0
    refined = node_crossings(summary.slices[0], 0, 1)
    ds = open_sweep(stores["uniform"][0])
    xu, yu = np.log10(ds.stiffness_ratio.values), ds.load_ratio.values
    uniform = grid_crossings(xu, yu, slice_codes(ds), 0, 1)
    du, dv = 4.0 / (fine_n - 1), 39.5 / (fine_n - 1)
    err_r, err_u = boundary_errors(refined, du, dv), boundary_errors(uniform, du, dv)
    spent = args.coarse ** 2 + summary.evaluations
    spent_uniform = fine_n ** 2
    print(f"coarse grid {args.coarse}x{args.coarse}, {args.levels} levels; uniform grid {fine_n}x{fine_n}")
    print(f"model evaluations: refined {spent} (grid {args.coarse ** 2} + {summary.evaluations} new: "
          f"{', '.join(map(str, summary.per_level))} per level), uniform {spent_uniform}")
    print(f"ratio uniform/refined: {spent_uniform / spent:.1f}x fewer evaluations (goal >= 10x)")
    for label, err, n in (("refined", err_r, len(refined)), ("uniform", err_u, len(uniform))):
        print(f"boundary error, {label}: {n} crossings, max {np.max(err):.3f}, mean {np.mean(err):.3f} fine "
              "spacings (<= 0.5 expected)")
    gap = hausdorff(refined, uniform, np.array([du, dv]))
    print(f"discrepancy refined vs uniform boundary (Hausdorff): {gap:.3f} fine spacings")
    print(f"times: refine {refine_seconds:.2f} s, uniform run {stores['uniform'][1]:.2f} s (zero-work model; "
          "with a real model the time follows the evaluation count)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
