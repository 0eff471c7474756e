"""Speed of ``curved_strip`` against a straightforward reference implementation (same run).

The model follows each point's whole moment–curvature path (geometric grid, limit point and
Maxwell fold refined by bisection, convergence probe, stored path, section shapes) batched
over points in the modal coordinates of the section. The reference does the same physics
one point at a time the textbook way: the dense Ritz system (B + 12(1−ν²)k²S) a = B a₀ − νpk g
solved with ``numpy.linalg.solve`` at every curvature of the same grid, the limit point by
``scipy.optimize.minimize_scalar`` on −m(k) and the fold by ``scipy.optimize.brentq`` on
k m − Û. Printed: milliseconds per point of each, their ratio, and the largest relative
difference of peak and fold moments. Also the cost of a single-point call and of cantilever
points (which add the tip-deflection inversion).

Run with one BLAS thread for the "one core" figure::

    OPENBLAS_NUM_THREADS=1 python benchmarks/bench_curved_strip.py

No asserts on time.
"""

from __future__ import annotations

import time

import numpy as np
from numpy.polynomial import legendre
from scipy.optimize import brentq, minimize_scalar

from sweepshell.models import make_model


def make_inputs(model, n, **columns):
    return {p.name: np.broadcast_to(np.asarray(columns.get(p.name, p.default)), (n,)).copy()
            for p in model.parameters}


def best_of(fn, repeats=3):
    times, out = [], None
    for _ in range(repeats):
        t = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
    return min(times), out


def dense_operators(modes):
    x, wq = legendre.leggauss(2 * modes + 8)
    wq = wq / 2
    phi = np.array([legendre.legval(x, np.eye(2 * j + 3)[-1]) for j in range(modes)])
    d2 = np.array([4 * legendre.legval(x, legendre.legder(np.eye(2 * j + 3)[-1], 2)) for j in range(modes)])
    bend = (d2 * wq) @ d2.T
    scale = 1 / np.sqrt(np.diag(bend))
    return bend * np.outer(scale, scale), ((phi * wq) @ phi.T) * np.outer(scale, scale), (d2 @ wq) * scale, scale


def reference_point(ops, c, nu, p, grid):
    bend, stretch, g, scale = ops
    a0 = np.zeros(len(g))
    a0[0] = c / 12 / scale[0]

    def state(k):
        lam = 12 * (1 - nu**2) * k**2
        a = np.linalg.solve(bend + lam * stretch, bend @ a0 - nu * p * k * g)
        da = a - a0
        energy = 0.5 * (lam * a @ stretch @ a + da @ bend @ da + 2 * nu * p * k * g @ da + k**2)
        return energy, lam / max(k, 1e-300) * a @ stretch @ a + nu * p * g @ da + k

    m = np.array([state(k)[1] for k in grid])
    rise = np.nonzero((np.diff(m)[:-1] > 0) & (np.diff(m)[1:] <= 0))[0]
    if rise.size == 0:
        return np.nan, np.nan
    i = rise[0] + 1
    opt = minimize_scalar(lambda k: -state(k)[1], bounds=(grid[i - 1], grid[i + 1]), method="bounded",
                          options={"xatol": 1e-10})
    k_peak = opt.x
    f = np.array([k * state(k)[1] - state(k)[0] for k in grid])
    up = np.nonzero((f[:-1] < 0) & (f[1:] >= 0) & (grid[:-1] > k_peak))[0]
    if up.size == 0:
        return -opt.fun, np.nan
    j = up[0]
    k_fold = brentq(lambda k: k * state(k)[1] - state(k)[0], grid[j], grid[j + 1], xtol=1e-12)
    return -opt.fun, state(k_fold)[1]


def main() -> None:
    model = make_model("curved_strip")
    s = model.settings
    rng = np.random.default_rng(7)
    n = 400
    w = rng.uniform(0.01, 0.06, n)
    radius = w / rng.uniform(0.2, 1.0, n)
    h = rng.uniform(5e-5, 3e-4, n)
    nu = rng.uniform(0.2, 0.4, n)
    load = rng.choice(["bend_opposite", "bend_equal"], n)
    inputs = make_inputs(model, n, width=w, transverse_radius=radius, thickness=h, poisson_ratio=nu, load=load)
    model.solve_batch(make_inputs(model, 2))  # operators built once per process
    t_model, res = best_of(lambda: model.solve_batch(inputs))
    d = inputs["youngs_modulus"] * h**3 / (12 * (1 - nu**2))
    unit = d * h / w
    c = w**2 / (radius * h)
    p = np.where(load == "bend_equal", 1.0, -1.0)
    ops = dense_operators(s["modes"])
    m_ref = 40
    t0 = time.perf_counter()
    ref = []
    for i in range(m_ref):
        k_max = s["curvature_range"] * (c[i] + 20.0)
        grid = np.exp(np.linspace(np.log(0.05), np.log(k_max), s["curvature_samples"]))
        ref.append(reference_point(ops, c[i], nu[i], p[i], grid))
    t_ref = (time.perf_counter() - t0) / m_ref
    ref_arr = np.array(ref)
    got = np.abs(np.column_stack([res.outputs["peak_moment"], res.outputs["fold_moment"]])[:m_ref]) / unit[:m_ref, None]
    with np.errstate(invalid="ignore"):
        diff = np.nanmax(np.abs(got / ref_arr - 1))
    per_point = t_model / n
    print(f"bending paths   model {per_point * 1e3:7.2f} ms/point ({n} points, {np.bincount(res.status)[1:]} by status)"
          f"   reference loop {t_ref * 1e3:7.1f} ms/point   ratio {t_ref / per_point:6.1f}x   "
          f"max rel diff of peak/fold moments {diff:.1e}")
    one = make_inputs(model, 1, width=0.04, transverse_radius=0.05)
    t_one, _ = best_of(lambda: model.solve_batch(one), repeats=5)
    print(f"single point    model {t_one * 1e3:7.2f} ms/call   ({t_ref / t_one:5.1f}x the reference point)")
    cant = dict(inputs, load=np.array(["cantilever"] * n), length=rng.uniform(0.1, 1.5, n))
    t_cant, res_c = best_of(lambda: model.solve_batch(cant))
    print(f"cantilever      model {t_cant / n * 1e3:7.2f} ms/point   ratio to bending points {t_cant / t_model:5.2f}   "
          f"({np.count_nonzero(res_c.regime == 2)} collapsed, {np.count_nonzero(res_c.regime == 0)} holding)")
    print(f"target: <= 50 ms per point for the full path on one core; measured {per_point * 1e3:.2f} ms "
          f"({50e-3 / per_point:.0f}x under)")


if __name__ == "__main__":
    main()
