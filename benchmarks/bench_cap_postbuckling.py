"""Speed of ``cap_postbuckling`` on one core: an apex path to 20 h at λ = 20, and its scaling with K.

1. The model at default settings on the target point (clamped, immovable, apex force, λ = 20,
   ``wave_number`` 0 so shallow_cap's scan runs first, ``max_indentation`` 20): seconds per point
   against the 2 s target, and the ratio to the same point's shallow_cap solve in this run
   (the baseline: the scan this model needs anyway).
2. The same path with ``harmonics`` K = 1 … 5 (``wave_number`` 3 given, no scan): seconds and
   the fitted exponent of time against the unknown count 2M(K+1).

The script pins BLAS to one thread (the "one core" figure). No asserts on time.
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("MKL_NUM_THREADS", "1")

import time

import numpy as np

from sweepshell.models import make_model
from sweepshell.models.cap_postbuckling.model import choose_grid


def _inputs(model, **values):  # type: ignore[no-untyped-def]
    inputs = {p.name: np.array([p.default]) for p in model.parameters}
    inputs.update({k: np.array([v]) for k, v in values.items()})
    return inputs


def _best_of(fn, repeats: int = 2) -> tuple[float, object]:  # type: ignore[no-untyped-def]
    best, out = np.inf, None
    for _ in range(repeats):
        start = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - start)
    return best, out


def main() -> None:
    point = {"shell_parameter": 20.0, "load": "apex_force", "edge": "clamped", "edge_inplane": "immovable"}
    cap = make_model("shallow_cap", {"check_bistability": False})
    post = make_model("cap_postbuckling")
    cap.solve_batch(_inputs(cap, **point))  # compile / load the shallow_cap kernels
    t_base, _ = _best_of(lambda: cap.solve_batch(_inputs(cap, **point)))
    t_post, res = _best_of(lambda: post.solve_batch(_inputs(post, **point, wave_number=0.0, max_indentation=20.0)))
    out = res.outputs  # type: ignore[attr-defined]
    print(f"apex path to 20 h, lambda = 20 (default K = {post.settings['harmonics']}): {t_post:.2f} s per point "
          f"(target 2 s); shallow_cap scan alone {t_base:.2f} s, ratio {t_post / t_base:.1f}")
    print(f"  n = {out['branch_wave_number'][0]:.0f}, bifurcation load {out['bifurcation_load'][0]:.4f}, "
          f"load at the last path point (δ ≥ 20 h) {out['load_path'][0, -1, 0]:.4f}, ridges {out['ridges'][0]:.0f}")
    nodes, _ = choose_grid(20.0, True, 0.0, 2.0, 0)
    sizes, times = [], []
    for k in (1, 2, 3, 4, 5):
        model = make_model("cap_postbuckling", {"harmonics": k})
        t, res = _best_of(lambda m=model: m.solve_batch(_inputs(m, **point, wave_number=3.0,  # type: ignore[misc]
                                                                    max_indentation=20.0)), repeats=1)
        load = res.outputs["load_path"][0, -1, 0]  # type: ignore[attr-defined]
        sizes.append(2 * nodes * (k + 1))
        times.append(t)
        print(f"  K = {k}: {2 * nodes * (k + 1)} unknowns, {t:.2f} s, load at the last path point {load:.5f}")
    exponent = np.polyfit(np.log(sizes[1:]), np.log(times[1:]), 1)[0]
    print(f"time grows like (unknowns)^{exponent:.2f} for K = 2 ... 5")


if __name__ == "__main__":
    main()
