"""Speed of sharp-edged mismatch points of ``shallow_cap``: two-domain grid against the clustered grid.

Both discretisations of a sharp region edge run in the same process on the same caps with
their automatic node counts and otherwise default settings (30 wave numbers, bistability
check): the two-domain grid split at the edge (``mismatch_grid`` split,
:mod:`sweepshell.numerics.radial_two_domain`) and the single grid clustered at the edge
(``mismatch_grid`` clustered). Cases: four caps sharing a region radius (one grid, one set of
mode operators), and caps that each have their own radius (operators built per point, as in a
sweep over the radius). Prints ms per point (best of ``--repeats``, after a warm-up that
compiles or loads the kernels), the ratio clustered/split and both critical loads; no asserts
on time.

Run: ``OPENBLAS_NUM_THREADS=1 python benchmarks/bench_sharp_mismatch.py [--repeats 3]``
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse
import time

import numpy as np

from sweepshell.models import make_model
from sweepshell.models.shallow_cap.model import ShallowCapModel

CASES = {  # label: shell parameters, region radii, signed strain range end, region
    "disc λ≈8 ρ=0.5": (np.array([7.8, 7.9, 8.0, 8.1]), np.full(4, 0.5), -8.0, "disc"),
    "disc λ≈20 ρ=0.5": (np.array([19.8, 19.9, 20.0, 20.1]), np.full(4, 0.5), -12.0, "disc"),
    "annulus λ≈6 ρ=0.5": (np.array([5.8, 5.9, 6.0, 6.1]), np.full(4, 0.5), 10.0, "annulus"),
    "disc λ=12, 6 radii": (np.full(6, 12.0), np.linspace(0.3, 0.8, 6), -10.0, "disc"),
}


def make_inputs(lam: np.ndarray, radius: np.ndarray, strain: float, region: str) -> dict[str, np.ndarray]:
    n = lam.size
    out = {p.name: np.full(n, p.default) if p.choices is None else np.array([p.default] * n)
           for p in ShallowCapModel.parameters}
    out.update(shell_parameter=lam, load=np.array(["mismatch"] * n), mismatch_strain=np.full(n, strain),
               mismatch_radius=radius, mismatch_region=np.array([region] * n))
    return out


def best_of(fn, repeats: int) -> tuple[float, object]:  # type: ignore[no-untyped-def]
    best, out = np.inf, None
    for _ in range(repeats):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=3)
    args = ap.parse_args()
    models = {grid: make_model("shallow_cap", {"mismatch_grid": grid}) for grid in ("split", "clustered")}
    for label, (lam, radius, strain, region) in CASES.items():
        inputs = make_inputs(lam, radius, strain, region)
        times, crit = {}, {}
        for grid, model in models.items():
            model.solve_batch(inputs)  # compile or load the kernels
            # operators are cached per grid: clear them so every repeat pays what a new radius costs
            t, res = best_of(lambda model=model, inputs=inputs: _fresh(model, inputs), args.repeats)
            times[grid], crit[grid] = t / lam.size, res.outputs["critical_load"]  # type: ignore[attr-defined]
        rel = np.nanmax(np.abs(crit["split"] / crit["clustered"] - 1.0))
        print(f"{label:20s} split {1e3 * times['split']:6.1f} ms/point   clustered {1e3 * times['clustered']:6.1f} "
              f"ms/point   ratio {times['clustered'] / times['split']:4.1f}x   largest relative difference "
              f"{rel:.1e}   split {np.round(crit['split'], 5)}")


def _fresh(model, inputs):  # type: ignore[no-untyped-def]
    from sweepshell.models.shallow_cap import modes, split_modes
    from sweepshell.numerics import radial_chebyshev, radial_two_domain

    for fn in (modes.build_mode_operators, modes._build_assembly_operators, modes._build_stress_reduction,
               modes._build_poisson_correction,
               split_modes._split_parts, radial_two_domain.build_split_grid, radial_chebyshev.build_radial_grid):
        fn.cache_clear()
    return model.solve_batch(inputs)


if __name__ == "__main__":
    main()
