"""Check the automatic grids of sharp-edged mismatch points against finer ones, on random caps.

Draws random ``shallow_cap`` mismatch caps (shell parameter, Poisson's ratio, edge conditions,
disc or annulus, region radius, sign and size of the strain range) with a sharp region edge
(the default), solves each on its automatic grid and on ``--fine`` nodes, and prints how many
agree in status and wave number and the largest relative difference of the critical load, with
the caps that differ. Radii below 0.15 are not drawn. Measured on the clustered grid (seed 3, 60
caps, against 80 nodes): statuses and wave numbers all agree, 1.3·10⁻⁴ at most. The two-domain grid
(seeds 3 and 4, against the clustered grid on 80 nodes and the split grid on 96) is recorded in
``sweepshell/models/shallow_cap/theory.md``.

The two-domain grid split at the region's edge (``mismatch_grid`` split) is checked against
the clustered grid with ``--grid split --fine-grid clustered``; ``--nodes`` fixes its node count
(default: automatic), ``--cache FILE`` keeps the fine results between runs (an ``.npz`` of
plain arrays, reused only for the same caps, seed and fine settings).

Run: ``python benchmarks/check_sharp_mismatch.py [--caps 60] [--seed 3] [--fine 80] [--grid clustered|split]
[--fine-grid clustered|split] [--nodes 0] [--cache FILE]``
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

from sweepshell.models import make_model
from sweepshell.models.shallow_cap.model import ShallowCapModel


def draw_caps(n: int, seed: int) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    caps = {p.name: np.full(n, p.default) if p.choices is None else np.array([p.default] * n)
            for p in ShallowCapModel.parameters}
    annulus = rng.random(n) < 0.4
    caps.update(shell_parameter=rng.uniform(3.5, 30.0, n), poisson_ratio=rng.choice([0.25, 0.3, 0.4], n),
                edge=rng.choice(["clamped", "pinned"], n), edge_inplane=rng.choice(["immovable", "sliding"], n),
                load=np.array(["mismatch"] * n), mismatch_region=np.where(annulus, "annulus", "disc"),
                mismatch_radius=rng.uniform(0.15, 0.9, n),
                mismatch_strain=rng.choice([-1.0, 1.0], n) * rng.uniform(5.0, 40.0, n))
    return caps


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--caps", type=int, default=60)
    ap.add_argument("--seed", type=int, default=3)
    ap.add_argument("--fine", type=int, default=80)
    ap.add_argument("--grid", choices=("clustered", "split"), default=None, help="default: the model's")
    ap.add_argument("--fine-grid", choices=("clustered", "split"), default="clustered")
    ap.add_argument("--nodes", type=int, default=0)
    ap.add_argument("--cache", type=Path, default=None)
    args = ap.parse_args()
    caps = draw_caps(args.caps, args.seed)
    settings = {"check_bistability": False}
    start = time.perf_counter()
    chosen = {} if args.grid is None else {"mismatch_grid": args.grid}
    model = make_model("shallow_cap", {**settings, "nodes": args.nodes, **chosen})
    auto = model.solve_batch(caps)
    print(f"{model.settings['mismatch_grid']} grid, nodes {args.nodes or 'automatic'}: "
          f"{time.perf_counter() - start:.1f} s")
    key = np.array([args.caps, args.seed, args.fine, args.fine_grid == "split"], dtype=float)
    if args.cache is not None and args.cache.exists() and np.array_equal(np.load(args.cache)["key"], key):
        stored = np.load(args.cache)
        fine_status, f, fine_wave = stored["status"], stored["critical_load"], stored["wavenumber"]
    else:
        fine = make_model("shallow_cap", {**settings, "nodes": args.fine, "mismatch_grid": args.fine_grid}
                          ).solve_batch(caps)
        fine_status, f = fine.status, fine.outputs["critical_load"]
        fine_wave = fine.outputs["critical_wavenumber"]
        if args.cache is not None:
            np.savez(args.cache, key=key, status=fine_status, critical_load=f, wavenumber=fine_wave)
    a, auto_wave = auto.outputs["critical_load"], auto.outputs["critical_wavenumber"]
    same_status = auto.status == fine_status
    both = (auto.status == 1) & (fine_status == 1)
    same_wave = auto_wave[both] == fine_wave[both]
    rel = np.abs(a[both] / f[both] - 1.0)
    print(f"{args.caps} caps (seed {args.seed}): status agrees {np.count_nonzero(same_status)}, "
          f"critical on both {np.count_nonzero(both)}, wave number agrees {np.count_nonzero(same_wave)}, "
          f"largest relative difference {rel.max() if rel.size else 0.0:.1e} (median "
          f"{np.median(rel) if rel.size else 0.0:.1e}) against {args.fine} nodes ({args.fine_grid} grid)")
    far = np.nonzero(both)[0][np.nonzero(~same_wave | (rel > 1e-4))[0]]
    for i in np.nonzero(~same_status)[0].tolist() + far.tolist():
        print(f"  differs: λ={caps['shell_parameter'][i]:.3f} ρ={caps['mismatch_radius'][i]:.3f} "
              f"{caps['mismatch_region'][i]} {caps['edge'][i]} {caps['edge_inplane'][i]} ν={caps['poisson_ratio'][i]} "
              f"e≤{caps['mismatch_strain'][i]:.2f}: auto {a[i]:.6f}/n={auto_wave[i]}"
              f"/status {auto.status[i]}, fine {f[i]:.6f}/n={fine_wave[i]}/status {fine_status[i]}")


if __name__ == "__main__":
    main()
