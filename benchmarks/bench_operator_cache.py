"""Stability-operator caches bounded by bytes against the former entry-count bounds, one run.

A worker of an apex-force sweep over λ = 6 … 30 sees blocks whose caps use 17 state grid
sizes, each with its 3× stability grid, times 30 wave numbers: more operator sets than the
former entry-count bounds held (512 mode operators, 2,048 stress reductions, 32 refinement
matrices), so every block rebuilt them. This times a worker's second block of such caps (CPU
seconds, the first block warms both variants) with the byte-bounded caches of ``modes`` and
``stability_grid`` and with the same builders under the former count bounds, checks that the
results are identical, and prints the ms per point, their ratio and the bytes held.

    /work/venv/bin/python benchmarks/bench_operator_cache.py [--caps 150] [--load apex_force]
"""

from __future__ import annotations

import argparse
import os
import time
from functools import lru_cache

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")  # as the command line and dask's workers run models

import numpy as np
from bench_shallow_cap import make_inputs  # this folder is on sys.path when run as a script

from sweepshell.models import make_model
from sweepshell.models.shallow_cap import modes
from sweepshell.numerics.array_cache import ArrayCache

BUILDERS = {"build_mode_operators": 512, "_build_assembly_operators": 512, "_build_stress_reduction": 2048,
            "build_refinement": 32}  # the former entry-count bounds
BUDGETS = {name: getattr(modes, name).max_bytes for name in BUILDERS}


def install(count_bounds: bool) -> None:
    """Fresh caches on the builders: the byte-bounded ones, or ``lru_cache`` with the former counts."""
    for name, count in BUILDERS.items():
        function = getattr(modes, name).__wrapped__
        cached = lru_cache(maxsize=count)(function) if count_bounds else ArrayCache(function, BUDGETS[name])
        setattr(modes, name, cached)


def second_block(inputs: dict[str, np.ndarray]) -> tuple[float, dict[str, np.ndarray]]:
    model = make_model("shallow_cap", {"check_bistability": False})
    model.solve_batch(inputs)
    t = time.process_time()
    out = model.solve_batch(inputs).outputs
    return time.process_time() - t, out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--caps", type=int, default=150)
    ap.add_argument("--load", default="apex_force", choices=("apex_force", "pressure"))
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args()
    lam = np.random.default_rng(args.seed).uniform(6.0, 30.0, args.caps)
    inputs = make_inputs(lam, args.load)
    seconds, outputs = {}, {}
    for label, count_bounds in (("entry counts", True), ("bytes", False)):
        install(count_bounds)
        seconds[label], outputs[label] = second_block(inputs)
    for key, value in outputs["bytes"].items():
        np.testing.assert_array_equal(value, outputs["entry counts"][key], err_msg=key)
    held = sum(getattr(modes, name).held_bytes for name in BUILDERS)
    print(f"{args.load}, {args.caps} clamped caps, λ uniform in [6, 30]: outputs identical")
    print(f"second block: byte-bounded caches {1e3 * seconds['bytes'] / args.caps:.1f} ms/point, former count "
          f"bounds {1e3 * seconds['entry counts'] / args.caps:.1f} ms/point, ratio "
          f"{seconds['entry counts'] / seconds['bytes']:.2f}x; held {held / 2**20:.0f} MB")


if __name__ == "__main__":
    main()
