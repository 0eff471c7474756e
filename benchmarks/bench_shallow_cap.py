"""Speed of the ``shallow_cap`` model against a straightforward reference, one run.

Reference: ``scipy.integrate.solve_bvp`` on the same axisymmetric equations, continued in the
apex deflection (a natural-parameter loop, one cap at a time, the pressure as unknown
parameter); the limit pressure is the parabola vertex through the largest sampled pressures,
refined twice through samples six times closer around it (agreement with the model ~5e-8, the
reference's own error: it starts at x = 1e-4 instead of the axis).
Prints ms per point (best of three runs) and the speed ratio; no asserts on time. The
axisymmetric batch is also timed with its first limit points refined along the arc of the
bracketing step (the path the asymmetric scan keeps) instead of solved for directly, as a ratio
in the same run.

Run: ``python benchmarks/bench_shallow_cap.py``
"""

from __future__ import annotations

import time
from unittest import mock

import numpy as np
from scipy.integrate import solve_bvp

from sweepshell.models import make_model
from sweepshell.models.shallow_cap import solver

NU = 0.3
C = np.sqrt(3.0 * (1.0 - NU**2))
LAMBDAS = np.array([3.6, 4.0, 4.5, 5.0])  # displacement control is monotone here


def make_inputs(lam: np.ndarray, load: str = "pressure") -> dict[str, np.ndarray]:
    """Clamped immovable perfect caps at shell parameters ``lam`` (also imported by other benchmarks)."""
    n = lam.size
    out = {"shell_parameter": lam, "poisson_ratio": np.full(n, NU), "edge": np.array(["clamped"] * n),
           "edge_inplane": np.array(["immovable"] * n), "load": np.array([load] * n),
           "dimple_amplitude": np.zeros(n), "dimple_width": np.full(n, 2.0),
           "mismatch_strain": np.full(n, -8.0), "mismatch_radius": np.full(n, 0.5),
           "mismatch_region": np.array(["disc"] * n)}
    for k in ("thickness", "sphere_radius", "base_radius", "youngs_modulus"):
        out[k] = np.full(n, np.nan)
    return out


def reference_limit_pressure(lam: float, x0: float = 1e-4) -> float:
    """Limit pressure of a clamped immovable cap by solve_bvp in displacement control."""
    l2, l4 = lam**2, lam**4

    def rhs(x, u, p):
        y, dy, f, df, _ = u
        q = p[0]
        s0 = l2 * x
        xly = f * (s0 - y) - 2.0 * l4 * q * x**2
        xlf = -s0 * y + 0.5 * y**2
        return np.vstack([dy, (xly - dy + y / x) / x, df, (xlf - df + f / x) / x, y])

    def make_bc(target):
        def bc(ua, ub, p):
            return np.array([ua[0], ua[2], ua[4], ub[0], ub[3] - NU * ub[2], ub[4] - target])
        return bc

    x = np.linspace(x0, 1.0, 60)
    u = np.zeros((5, x.size))
    p = np.array([0.0])
    depth = l2 / (2 * C)  # 2H/h
    qs, ds, sols = [], [], []
    for delta in np.linspace(0.0, 0.5 * depth, 120)[1:]:
        target = delta * 2 * C  # ∫ y dx = 2c δ/h
        sol = solve_bvp(rhs, make_bc(target), x, u, p, tol=1e-8, max_nodes=20000)
        if not sol.success:
            break
        x, u, p = sol.x, sol.y, sol.p
        qs.append(p[0])
        ds.append(delta)
        sols.append(sol)
        if len(qs) > 3 and qs[-1] < qs[-2] < qs[-3]:
            break
    k = int(np.argmax(qs))
    # the parabola through the three largest samples, then twice through samples 6x closer around its vertex
    # (its error falls with the spacing squared: ~1e-5 from the coarse samples, ~1e-7 after)
    d3, q3 = np.array(ds[k - 1:k + 2]), np.array(qs[k - 1:k + 2])
    start = sols[k]
    for _ in range(2):
        a, b, _c = np.polyfit(d3, q3, 2)
        centre = -b / (2 * a)
        spacing = (d3[2] - d3[0]) / 12.0
        d3 = centre + spacing * np.array([-1.0, 0.0, 1.0])
        q_new = []
        for delta in d3:
            sol = solve_bvp(rhs, make_bc(delta * 2 * C), start.x, start.y, start.p, tol=1e-8, max_nodes=20000)
            q_new.append(sol.p[0])
        q3 = np.array(q_new)
    a, b, c = np.polyfit(d3, q3, 2)
    return float(c - b * b / (4 * a))


def time_per_point(model, lam: np.ndarray, repeats: int = 3) -> float:  # type: ignore[no-untyped-def]
    """Best of ``repeats`` wall times per point (the first run also warms this batch's grids)."""
    best = np.inf
    for _ in range(repeats):
        t = time.perf_counter()
        model.solve_batch(make_inputs(lam))
        best = min(best, time.perf_counter() - t)
    return best / lam.size


def time_without_fold_solve(model, lam: np.ndarray) -> float:  # type: ignore[no-untyped-def]
    """Per-point time with every limit point refined along its bracketing step (no direct solve)."""
    trace = solver.trace_cap_paths

    def refined(*args, **kwargs):  # type: ignore[no-untyped-def]
        return trace(*args, **{**kwargs, "fold_solve": False})

    with mock.patch.object(solver, "trace_cap_paths", refined):
        model.solve_batch(make_inputs(lam))
        return time_per_point(model, lam)


def main() -> None:
    fast = make_model("shallow_cap", {"asymmetric_modes": 0, "check_bistability": False})
    scan = make_model("shallow_cap", {"check_bistability": False})
    full = make_model("shallow_cap", {})
    big = np.linspace(3.5, 20.0, 200)
    mid = np.linspace(3.5, 20.0, 40)
    # warm the compiled kernels and the per-grid caches (operators of each automatic grid size), as
    # a sweep's workers have them after their first block
    for m in (fast, scan, full):
        m.solve_batch(make_inputs(mid))
    t_fast = time_per_point(fast, big)
    t_scan = time_per_point(scan, mid)
    t_full = time_per_point(full, mid)
    t = time.perf_counter()
    ours = fast.solve_batch(make_inputs(LAMBDAS)).outputs["critical_load"]
    t_ours = (time.perf_counter() - t) / LAMBDAS.size
    t = time.perf_counter()
    ref = np.array([reference_limit_pressure(lam) for lam in LAMBDAS])
    t_ref = (time.perf_counter() - t) / LAMBDAS.size
    print("lambda  model q_max   reference q_max   rel. diff")
    for lam, a, b in zip(LAMBDAS, ours, ref, strict=True):
        print(f"{lam:6.2f}  {a:.8f}    {b:.8f}        {abs(a - b) / b:.1e}")
    print(f"axisymmetric limit pressure, batch of {big.size}: {t_fast * 1e3:.2f} ms/point")
    t_arc = time_without_fold_solve(fast, big)
    t_direct = time_per_point(fast, big)
    print(f"  limit points refined along the arc instead: {t_arc * 1e3:.2f} ms/point "
          f"(direct solve {t_direct * 1e3:.2f} ms/point, {t_arc / t_direct:.2f}x)")
    for lo, hi in ((3.5, 8.0), (8.0, 14.0), (14.0, 20.0)):
        band = np.linspace(lo, hi, 100)
        print(f"  lambda {lo:4.1f} .. {hi:4.1f}: {time_per_point(fast, band) * 1e3:.2f} ms/point")
    print(f"with the asymmetric scan (n = 1..30), batch of {mid.size}: {t_scan * 1e3:.2f} ms/point")
    print(f"full analysis (scan and bistability), batch of {mid.size}: {t_full * 1e3:.2f} ms/point")
    print(f"same {LAMBDAS.size} caps: model {t_ours * 1e3:.2f} ms/point, reference {t_ref * 1e3:.1f} ms/point,"
          f" ratio {t_ref / t_ours:.0f}x (batched model {t_ref / t_fast:.0f}x)")


if __name__ == "__main__":
    main()
