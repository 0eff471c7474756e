"""Speed of ``foundation_sheet`` against a straightforward reference implementation (same run).

Three measurements, each printed with its agreement check:

1. the model at default settings (64 × 64 grid, 8 critical wavelengths per cell side, all
   seeds) on three pattern points (uniaxial stripes, equibiaxial herringbone, equibiaxial
   labyrinth): seconds per point against the 0.2 s target;
2. one minimisation per point, the fast solver (Airy-reduced energy, preconditioned
   L-BFGS of our own) vs the reference in :mod:`sweepshell.models.foundation_sheet.reference`
   (in-plane displacements kept as unknowns, collocation, no preconditioning,
   ``scipy.optimize`` L-BFGS-B) on a 32 × 32 grid from the same start: energy agreement
   and the time ratio. Points whose equilibrium is unique from any start (stripes, and
   the checkerboard just above onset) are used, so the energies must agree.

3. the current path against the previous one in the same run: the model at default
   settings on the same three points, with the energy's transforms switched back to the
   public ``scipy.fft`` functions and the L-BFGS two-loop recursion back to a new array per
   correction pair (the path before the direct pocketfft calls and the in-place
   recursion); the outputs must be identical bit for bit, and the time ratio is printed.

The script pins BLAS to one thread (the "one core" figure). No asserts on time.
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("MKL_NUM_THREADS", "1")

import contextlib
import time
from collections.abc import Iterator

import numpy as np

from sweepshell.models import make_model
from sweepshell.models.foundation_sheet import energy as energy_module
from sweepshell.models.foundation_sheet import minimize as minimize_module
from sweepshell.models.foundation_sheet.energy import (
    build_sheet_problem,
    compute_height_field,
    project_field_to_modes,
)
from sweepshell.models.foundation_sheet.minimize import minimize_sheet_energy
from sweepshell.models.foundation_sheet.model import compute_sheet_scales
from sweepshell.models.foundation_sheet.reference import minimize_reference_energy


def make_inputs(model, n, **columns):
    return {p.name: np.broadcast_to(np.asarray(columns.get(p.name, p.default)), (n,)).copy()
            for p in model.parameters}


def bench_default_points() -> float:
    model = make_model("foundation_sheet", {})
    d = {p.name: p.default for p in model.parameters}
    eps_c = float(compute_sheet_scales(d["film_thickness"], d["film_modulus"], d["film_poisson_ratio"],
                                       d["substrate_modulus"], d["substrate_poisson_ratio"],
                                       d["substrate"])["critical_strain"])
    nu = d["film_poisson_ratio"]
    points = {"uniaxial 1.5": (1.5, 0.0), "equibiaxial 1.2": (1.2 / (1 + nu),) * 2,
              "equibiaxial 2.0": (2.0 / (1 + nu),) * 2}
    print(f"1. model at default settings {model.settings['seeds']} seeds, "
          f"modes={d['modes']}, cell_wavelengths={d['cell_wavelengths']}")
    times = []
    for label, (s1, s2) in points.items():
        inputs = make_inputs(model, 1, strain_x=s1 * eps_c, strain_y=s2 * eps_c)
        t = time.perf_counter()
        res = model.solve_batch(inputs)
        dt = time.perf_counter() - t
        times.append(dt)
        print(f"   {label:16s} {model.regimes[res.regime[0]]:12s} status={res.status[0]} "
              f"iterations={res.diagnostics['iterations'][0]:5d}  {dt:6.2f} s/point")
    mean = float(np.mean(times))
    print(f"   mean {mean:.2f} s/point (target <= 0.2 s)")
    return mean


def bench_against_reference() -> None:
    n, cells, nu = 32, 4, 0.3
    cases = {"stripes (1.5, 0)": (1.5, 0.0), "checkerboard (1.05 equibiaxial)": (1.05 / 1.3, 1.05 / 1.3)}
    print(f"2. fast solver vs displacement-form reference, {n}x{n}, {cells} wavelengths, one start")
    ratios = []
    for label, s in cases.items():
        problem = build_sheet_problem(n, cells, "half_space", nu, s)
        z0 = project_field_to_modes(problem, np.random.default_rng(1).standard_normal((n, n)))
        z0 *= 0.02 / np.sqrt(np.mean(compute_height_field(problem, z0) ** 2))
        t = time.perf_counter()
        fast = minimize_sheet_energy(problem, z0, gradient_tolerance=1e-4)
        t_fast = time.perf_counter() - t
        t = time.perf_counter()
        ref = minimize_reference_energy(n, cells, "half_space", nu, s, compute_height_field(problem, z0))
        t_ref = time.perf_counter() - t
        rel = abs(fast.energy - ref.energy) / abs(ref.energy)
        ratios.append(t_ref / t_fast)
        print(f"   {label:32s} energy {fast.energy:.8f} vs {ref.energy:.8f} (rel diff {rel:.1e})  "
              f"fast {t_fast:.3f} s ({fast.iterations} it)  reference {t_ref:.2f} s ({ref.iterations} it)  "
              f"ratio {t_ref / t_fast:.0f}x")
    print(f"   speed-up over the reference: {min(ratios):.0f}x to {max(ratios):.0f}x")


def _previous_lbfgs_direction(g, pairs):  # type: ignore[no-untyped-def]
    """The two-loop recursion as it was: a new array for every update."""
    q = -g
    alphas = []
    for s_vec, y_vec, sy in reversed(pairs):
        a = float(s_vec @ q) / sy
        alphas.append(a)
        q = q - a * y_vec
    if pairs:
        y_last = pairs[-1][1]
        q = q * (pairs[-1][2] / float(y_last @ y_last))
    for (s_vec, y_vec, sy), a in zip(pairs, reversed(alphas), strict=True):
        q = q + (a - float(y_vec @ q) / sy) * s_vec
    return q


@contextlib.contextmanager
def previous_path() -> Iterator[None]:
    """Run the model on the previous path: public scipy.fft transforms, allocating two-loop."""
    saved = (energy_module._rfft2, energy_module._irfft2, minimize_module._compute_lbfgs_direction)
    energy_module._rfft2, energy_module._irfft2 = energy_module._rfft2_public, energy_module._irfft2_public
    minimize_module._compute_lbfgs_direction = _previous_lbfgs_direction
    try:
        yield
    finally:
        energy_module._rfft2, energy_module._irfft2, minimize_module._compute_lbfgs_direction = saved


def bench_against_previous_path(repeats: int = 2) -> None:
    model = make_model("foundation_sheet", {})
    d = {p.name: p.default for p in model.parameters}
    eps_c = float(compute_sheet_scales(d["film_thickness"], d["film_modulus"], d["film_poisson_ratio"],
                                       d["substrate_modulus"], d["substrate_poisson_ratio"],
                                       d["substrate"])["critical_strain"])
    nu = d["film_poisson_ratio"]
    points = {"uniaxial 1.5": (1.5, 0.0), "equibiaxial 1.2": (1.2 / (1 + nu),) * 2,
              "equibiaxial 2.0": (2.0 / (1 + nu),) * 2}
    print(f"3. current vs previous path, default settings, best of {repeats} interleaved runs")
    print(f"   transforms: {energy_module._rfft2.__module__}.{energy_module._rfft2.__qualname__}")
    ratios = []
    for label, (s1, s2) in points.items():
        inputs = make_inputs(model, 1, strain_x=s1 * eps_c, strain_y=s2 * eps_c)
        best = {"previous": np.inf, "current": np.inf}
        results = {}
        for _ in range(repeats):
            for name in ("previous", "current"):
                with previous_path() if name == "previous" else contextlib.nullcontext():
                    t = time.perf_counter()
                    results[name] = model.solve_batch(inputs)
                    best[name] = min(best[name], time.perf_counter() - t)
        same = all(np.array_equal(results["previous"].outputs[k], results["current"].outputs[k], equal_nan=True)
                   for k in results["current"].outputs)
        same = same and np.array_equal(results["previous"].regime, results["current"].regime)
        ratios.append(best["previous"] / best["current"])
        print(f"   {label:16s} {model.regimes[results['current'].regime[0]]:12s} previous {best['previous']:5.2f} s"
              f"  current {best['current']:5.2f} s  ratio {ratios[-1]:.2f}x  identical outputs: {same}")
    print(f"   speed-up over the previous path: {min(ratios):.2f}x to {max(ratios):.2f}x")


if __name__ == "__main__":
    bench_default_points()
    bench_against_reference()
    bench_against_previous_path()
