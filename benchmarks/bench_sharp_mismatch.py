"""Speed of sharp-edged mismatch points of ``shallow_cap`` (one run, ratios in the same run).

The model solves a sharp region edge on the two-domain grid split at the edge
(:mod:`sweepshell.numerics.split_chebyshev`) with the automatic node count. Baseline, measured
in the same run: the same caps on one Chebyshev grid of 44 + 1.8λ nodes (the count a
single-domain grid needs for 10⁻⁴ with nodes clustered at the edge, whose cost is that of its node
count; on plain nodes, as here, it is also only first-order accurate, so the baseline's values are
printed for the time only). Default settings (30 wave numbers, bistability check) otherwise.
Prints ms per point and the ratio; no asserts on time.

Run: ``OPENBLAS_NUM_THREADS=1 python benchmarks/bench_sharp_mismatch.py``
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import time

import numpy as np

from sweepshell.models import make_model
from sweepshell.models.shallow_cap.model import ShallowCapModel
from sweepshell.models.shallow_cap.solver import CapInputs, solve_caps

CASES = {  # label: shell parameters, signed strain range end, region
    "disc λ≈8 ρ=0.5": (np.array([7.8, 7.9, 8.0, 8.1]), -8.0, "disc"),
    "disc λ≈20 ρ=0.5": (np.array([19.8, 19.9, 20.0, 20.1]), -12.0, "disc"),
    "annulus λ≈6 ρ=0.5": (np.array([5.8, 5.9, 6.0, 6.1]), 10.0, "annulus"),
}


def make_inputs(lam: np.ndarray, strain: float, region: str) -> dict[str, np.ndarray]:
    n = lam.size
    out = {p.name: np.full(n, p.default) if p.choices is None else np.array([p.default] * n)
           for p in ShallowCapModel.parameters}
    out.update(shell_parameter=lam, load=np.array(["mismatch"] * n), mismatch_strain=np.full(n, strain),
               mismatch_radius=np.full(n, 0.5), mismatch_region=np.array([region] * n))
    return out


def best_of(fn, repeats: int = 3) -> tuple[float, object]:
    best, out = np.inf, None
    for _ in range(repeats):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def main() -> None:
    model = make_model("shallow_cap", {})
    s = model.settings
    for label, (lam, strain, region) in CASES.items():
        inputs = make_inputs(lam, strain, region)
        model.solve_batch(inputs)  # compile or load kernels, build the grid's operators
        t_split, res = best_of(lambda inputs=inputs: model.solve_batch(inputs))
        one = np.ones(lam.size, dtype=bool)
        caps = CapInputs(lam, np.full(lam.size, 0.3), one, one, ~one, np.zeros(lam.size), np.full(lam.size, 2.0),
                         mismatch=one, mismatch_strain=np.full(lam.size, strain),
                         mismatch_radius=np.full(lam.size, 0.5), annulus=one if region == "annulus" else ~one)
        nodes = int(np.clip(np.ceil((44.0 + 1.8 * lam.mean()) / 2.0) * 2.0, 48, 96))
        single = {**s, "nodes": nodes, "grid_stretch": 0.0, "grid_centre": 0.0, "mismatch_step_width": 0.0}
        solve_caps(caps, settings=single)
        t_single, _ = best_of(lambda caps=caps, single=single: solve_caps(caps, settings=single))
        crit = res.outputs["critical_load"]
        print(f"{label:20s} two-domain {1e3 * t_split / lam.size:7.1f} ms/point   one grid of {nodes} nodes "
              f"{1e3 * t_single / lam.size:7.1f} ms/point   ratio {t_single / t_split:5.1f}x   "
              f"critical loads {np.round(crit, 5)}")


if __name__ == "__main__":
    main()
