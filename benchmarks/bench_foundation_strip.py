"""Speed of ``foundation_strip`` against straightforward reference implementations (same run).

Three measurements, each printed with its agreement check and the speed ratio:

1. linear onset (compression points below onset, path skipped) and closed-form flexure:
   the batched model vs a per-point Python loop (flexure reference: scipy ``solve_bvp``);
2. one confinement path to the fold per point: the model (chord Newton, pseudo-arclength)
   vs a plain reference — natural-parameter continuation in the end-shortening with
   ``scipy.optimize.root`` and the analytic Jacobian, a fresh solve at every grid value;
3. a confinement sweep of one strip (points share one path) vs one model call per point.

Run with one BLAS thread for the "one core" figure::

    OPENBLAS_NUM_THREADS=1 python benchmarks/bench_foundation_strip.py

No asserts on time.
"""

from __future__ import annotations

import time

import numpy as np
from scipy.integrate import solve_bvp
from scipy.optimize import root

from sweepshell.models import make_model
from sweepshell.models.foundation_strip.continuation import StripPath
from sweepshell.models.foundation_strip.elastica import (
    build_strip_grid,
    build_strip_problem,
    compute_crest_contrast,
    compute_gradient,
    compute_hessian,
    compute_node_heights,
)
from sweepshell.models.foundation_strip.path import FoldWatch, compute_pinned_onset

TWO_PI = 2.0 * np.pi


def make_inputs(model, n, **columns):
    return {p.name: np.broadcast_to(np.asarray(columns.get(p.name, p.default)), (n,)).copy()
            for p in model.parameters}


def best_of(fn, repeats=3):
    times = []
    out = None
    for _ in range(repeats):
        t = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
    return min(times), out


def bench_onset_and_flexure() -> None:
    model = make_model("foundation_strip", {"follow_path_below_onset": False})
    n = 20000
    rng = np.random.default_rng(1)
    B, K = rng.uniform(0.5, 5, n), rng.uniform(0.5, 5, n)
    inputs = make_inputs(model, n, bending_stiffness=B, foundation_stiffness=K, stretching_stiffness=1e3,
                         confinement=0.0)
    t_model, res = best_of(lambda: model.solve_batch(inputs))
    lengths = np.full(200, 8 * TWO_PI)
    t0 = time.perf_counter()
    ref = [float(compute_pinned_onset(float(L))[0]) / 2.0 for L in lengths]
    t_ref = (time.perf_counter() - t0) / lengths.size
    err = np.max(np.abs(res.outputs["critical_load"] - ref[0]))
    print(f"onset      model {n / t_model:10.0f} points/s   reference loop {1 / t_ref:10.0f} points/s   "
          f"ratio {t_ref * n / t_model:6.1f}x   max diff {err:.1e}")

    m = 20000
    T = rng.uniform(5e3, 60e3, m)
    flex_inputs = make_inputs(model, m, problem="flexure", elastic_thickness=T, end_load=2e12, end_moment=1e16,
                              axial_force=1e12)
    t_flex, fres = best_of(lambda: model.solve_batch(flex_inputs))
    # reference: scipy collocation per point, forebulge found on the sampled profile
    k = 5
    t0 = time.perf_counter()
    diffs = []
    for i in range(k):
        D = 70e9 * T[i] ** 3 / (12 * (1 - 0.25 ** 2))
        Kf = 2300 * 9.81
        alpha = (4 * D / Kf) ** 0.25
        N, V0, M = 1e12, 2e12, 1e16

        def rhs(x, u, D=D, Kf=Kf, N=N):
            return np.vstack([u[1], u[2], u[3], -(N * u[2] + Kf * u[0]) / D])

        def bc(ua, ub, D=D, N=N, V0=V0, M=M):
            return np.array([D * ua[2] - M, D * ua[3] + N * ua[1] - V0, ub[0], ub[1]])

        x = np.linspace(0, 12 * alpha, 300)
        sol = solve_bvp(rhs, bc, x, np.zeros((4, x.size)), tol=1e-8, max_nodes=100000)
        w = sol.sol(np.linspace(0, 6 * alpha, 20001))[0]
        diffs.append(abs(w[np.argmax(np.abs(w))] - fres.outputs["max_deflection"][i]) / abs(w[0]))
    t_bvp = (time.perf_counter() - t0) / k
    print(f"flexure    model {m / t_flex:10.0f} points/s   reference solve_bvp {1 / t_bvp:10.1f} points/s   "
          f"ratio {t_bvp * m / t_flex:8.0f}x   max rel diff {max(diffs):.1e}")


def reference_fold(imperfection: float, segments_per_wavelength: int = 16, length: float = 8.0,
                   d_max: float = 0.035, count: int = 70) -> float:
    """Fold confinement by natural-parameter continuation in d with scipy.optimize.root."""
    L = length * TWO_PI
    grid = build_strip_grid(L, round(segments_per_wavelength * length))
    problem = build_strip_problem(grid, imperfection=imperfection * TWO_PI, width=TWO_PI, cubic=0.0)
    n, h = grid.n, grid.h

    def fun(z, d):
        phi, P, R = z[:n], z[n], z[n + 1]
        sin, cos = np.sin(phi), np.cos(phi)
        r = np.empty(n + 2)
        r[:n] = compute_gradient(problem, phi) / h - P * sin + R * cos
        r[n] = (h * np.sum(1 - cos) - problem.slack0) / L - d
        r[n + 1] = h * np.sum(sin) / L
        J = np.zeros((n + 2, n + 2))
        J[:n, :n] = compute_hessian(problem, phi) / h
        J[np.diag_indices(n)] += -P * cos - R * sin
        J[:n, n], J[:n, n + 1] = -sin, cos
        J[n, :n], J[n + 1, :n] = h * sin / L, h * cos / L
        return r, J

    z = np.concatenate([problem.phi0, [0.0, 0.0]])
    path = StripPath()
    watch = FoldWatch(3.0)
    # the load rises steeply at small d: geometric grid in d, then uniform
    state = {"z": z, "z_prev": z, "d": 0.0, "d_prev": 0.0}

    def advance(d: float, depth: int = 0) -> bool:
        # secant predictor from the last two solutions; halve the step where root fails
        z, zp, dl, dp = state["z"], state["z_prev"], state["d"], state["d_prev"]
        guess = z + (z - zp) * (d - dl) / (dl - dp) if dl > dp else z
        sol = root(fun, guess, args=(d,), jac=True, method="hybr", tol=1e-10)
        if sol.success:
            state.update(z=sol.x, z_prev=z, d=d, d_prev=dl)
            return True
        if depth >= 6:
            return False
        return advance(0.5 * (dl + d), depth + 1) and advance(d, depth + 1)

    for d in np.concatenate([np.geomspace(1e-8, 1e-3, 40), np.linspace(1e-3, d_max, count)[1:]]):
        if not advance(float(d)):
            return float("nan")
        z = state["z"]
        contrast, amp = compute_crest_contrast(compute_node_heights(z[:n], h))
        path.confinement.append(float(d))
        path.load.append(float(z[n]))
        path.contrast.append(contrast)
        path.amplitude.append(amp)
        watch.update(path)
        if watch.fold is not None:
            return watch.fold
    return float("nan")


def bench_path() -> None:
    model = make_model("foundation_strip")
    imps = np.array([3e-4, 1e-3, 3e-3])
    inputs = make_inputs(model, imps.size, imperfection=imps, confinement=0.0)  # distinct strips: 3 paths
    t_model, res = best_of(lambda: model.solve_batch(inputs), repeats=2)
    t0 = time.perf_counter()
    ref = [reference_fold(a) for a in imps]
    t_ref = time.perf_counter() - t0
    fold = res.outputs["fold_confinement"]
    rel = np.max(np.abs(fold - ref) / np.asarray(ref))
    print(f"path       model {t_model / imps.size:8.3f} s/point   reference root loop {t_ref / imps.size:8.3f} s/point"
          f"   ratio {t_ref / t_model:6.1f}x   fold model {np.round(fold, 4)} ref {np.round(ref, 4)}"
          f" (max rel diff {rel:.1%}, reference grid spacing {0.034 / 69:.1e})")

    sweep = make_inputs(model, 31, confinement=np.linspace(0.0, 0.06, 31))
    t_shared, _ = best_of(lambda: model.solve_batch(sweep), repeats=1)
    t0 = time.perf_counter()
    for c in np.linspace(0.0, 0.06, 31)[::6]:
        model.solve_batch(make_inputs(model, 1, confinement=c))
    t_single = (time.perf_counter() - t0) / 6
    print(f"sweep      31 confinements of one strip: {t_shared / 31:8.4f} s/point shared path   "
          f"{t_single:8.4f} s/point one call each   ratio {t_single * 31 / t_shared:6.1f}x")


if __name__ == "__main__":
    bench_onset_and_flexure()
    bench_path()
