"""Model points with the BLAS on its default thread count against one thread, one run.

A sweep started from Python computes its in-process blocks and its boundary and refinement
points in the caller's process, whose numpy may have loaded a multi-threaded BLAS; the engine
computes them under :func:`sweepshell.engine.blas_threads.one_blas_thread`. This times one
batch of apex-force caps (the 3× stability grids: matrices of 80 to 180 rows) and one of
pressure caps both ways, in wall and CPU seconds, and prints the ratios. Run it without
``OPENBLAS_NUM_THREADS`` set (the point is the default).

    /work/venv/bin/python benchmarks/bench_blas_threads.py [--caps 30]
"""

from __future__ import annotations

import argparse
import contextlib
import time

import numpy as np
from bench_shallow_cap import make_inputs  # this folder is on sys.path when run as a script
from threadpoolctl import threadpool_info

from sweepshell.engine.blas_threads import one_blas_thread
from sweepshell.models import make_model


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--caps", type=int, default=30)
    args = ap.parse_args()
    model = make_model("shallow_cap", {"check_bistability": False})
    lam = np.random.default_rng(1).uniform(6.0, 30.0, args.caps)
    for load in ("apex_force", "pressure"):
        inputs = make_inputs(lam, load)
        model.solve_batch(inputs)  # compiled kernels, grids and operators
        threads = sorted({lib["num_threads"] for lib in threadpool_info() if lib["user_api"] == "blas"})
        times = {}
        for label, limit in (("default", contextlib.nullcontext()), ("one thread", one_blas_thread())):
            with limit:
                wall, cpu = time.perf_counter(), time.process_time()
                model.solve_batch(inputs)
                times[label] = (time.perf_counter() - wall, time.process_time() - cpu)
        (w0, c0), (w1, c1) = times["default"], times["one thread"]
        print(f"{load:10s} {args.caps} caps, λ in [6, 30]: BLAS default ({threads} threads) "
              f"{1e3 * w0 / args.caps:7.1f} "
              f"ms/point wall, {1e3 * c0 / args.caps:7.1f} CPU; one thread {1e3 * w1 / args.caps:6.1f} wall, "
              f"{1e3 * c1 / args.caps:6.1f} CPU; ratio {w0 / w1:.2f}x wall, {c0 / c1:.2f}x CPU")


if __name__ == "__main__":
    main()
