"""Determinants of the shallow cap's reduced stability matrices: compiled in-place LU against numpy's slogdet.

For grid sizes M from 16 to 128, a batch of reduced matrices ``A − B S⁻¹ C`` (30 wave numbers of
pressure-loaded states on a λ = 10 cap's grid) goes through ``np.linalg.slogdet`` and through
``compiled_modes.slogdet_in_place`` (on a copy) in the same run. Prints µs per matrix for both, the
ratio, and whether the signs agree and how far the log-determinants differ; no asserts on time.
The scans use the compiled LU up to ``modes.SMALL_LU_NODES`` nodes.

Run: ``python benchmarks/bench_small_slogdet.py [--repeats 20]``
"""

from __future__ import annotations

import argparse
import os
import time

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")  # as the command line and dask's workers run models

import numpy as np

from sweepshell.models.shallow_cap import modes
from sweepshell.models.shallow_cap.compiled_modes import slogdet_in_place
from sweepshell.models.shallow_cap.problem import build_problem


def reduced_matrices(size: int, states: int = 8) -> np.ndarray:
    """Return ``(30·states, M, M)`` reduced matrices of smooth random pressure-like states."""
    k = states
    pb = build_problem(np.full(k, 10.0), np.full(k, 0.3), np.ones(k, bool), np.ones(k, bool), np.zeros(k, bool),
                       np.zeros(k), np.full(k, 2.0), size)
    x = pb.grid.x
    rng = np.random.default_rng(size)
    z = np.zeros((k, 2 * size + 1))
    z[:, :size] = rng.uniform(-0.3, 0.3, (k, 1)) * x**3 - rng.uniform(0.0, 0.3, (k, 1)) * x
    z[:, size:2 * size] = rng.uniform(0.0, 1.0, (k, 1)) * x
    z[:, -1] = 0.5
    co = modes.compute_mode_coefficients(pb, z, np.arange(k))
    return np.concatenate([a for _, _, a in modes._reduced_matrices(pb, co, np.arange(1, 31))])


def best_time(call, repeats: int) -> float:  # type: ignore[no-untyped-def]
    best = np.inf
    for _ in range(repeats):
        t = time.process_time()
        call()
        best = min(best, time.process_time() - t)
    return best


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=20)
    args = ap.parse_args()
    slogdet_in_place(reduced_matrices(16))  # load the compiled kernel
    print("   M   numpy slogdet   compiled LU   ratio   signs   max |Δ log|det||")
    for size in (16, 24, 32, 40, 48, 56, 64, 80, 96, 128):
        a = reduced_matrices(size)
        s_np, l_np = np.linalg.slogdet(a)
        s_lu, l_lu = slogdet_in_place(a.copy())
        copy = best_time(a.copy, args.repeats)
        t_np = best_time(lambda: np.linalg.slogdet(a), args.repeats)  # noqa: B023
        t_lu = best_time(lambda: slogdet_in_place(a.copy()), args.repeats) - copy  # noqa: B023
        per = 1e6 / a.shape[0]
        print(f"{size:4d}   {t_np * per:9.1f} µs   {t_lu * per:8.1f} µs   {t_np / t_lu:5.2f}   "
              f"{'same' if np.array_equal(s_np, s_lu) else 'DIFFER'}   {np.abs(l_np - l_lu).max():.1e}")


if __name__ == "__main__":
    main()
