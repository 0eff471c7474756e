"""Where an apex-force point's time goes: screen, stability grid, trace, refinement (one run).

Solves a batch of apex-force caps twice with the asymmetric scan (the first run builds the grids
and operators, as a sweep's worker has them after its first block) and times the second by phase
in CPU time, which a shared machine disturbs less than wall time: the screening determinants
(every path step on the state's own grid), the stability-grid determinants (3× grid, where the
screen says), the path trace and the bifurcation refinement.
``--caps perfect``: perfect clamped immovable caps, λ uniform on 6 … 30 (ν = 0.3); ``mix``: the
caps of ``check_apex_scan.py`` (all edges, four ν, a third dimpled). Prints ms per point; no asserts.
Compare versions by running it on two checkouts, alternately.

Run: ``python benchmarks/bench_apex_phases.py [--caps perfect|mix] [--count 60] [--screen-nodes 1.0]``
"""

from __future__ import annotations

import argparse
import os
import time
from collections import Counter
from collections.abc import Callable
from typing import Any

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")  # as the command line and dask's workers run models

import numpy as np
from bench_shallow_cap import make_inputs  # this folder is on sys.path when run as a script
from check_apex_scan import draw_caps

from sweepshell.models import make_model
from sweepshell.models.shallow_cap import screened_scan, solver, stability_grid

SECONDS: Counter[str] = Counter()


def timed(module: Any, name: str, label: Callable[[tuple, dict], str]) -> None:
    """Replace ``module.name`` by a wrapper that adds its wall time to ``SECONDS[label(args, kwargs)]``."""
    function = getattr(module, name)

    def wrapper(*args: Any, **kwargs: Any) -> Any:
        t = time.process_time()
        try:
            return function(*args, **kwargs)
        finally:
            SECONDS[label(args, kwargs)] += time.process_time() - t

    setattr(module, name, wrapper)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--caps", choices=("perfect", "mix"), default="perfect")
    ap.add_argument("--count", type=int, default=60)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--screen-nodes", type=float, default=None, help="screening grid over state nodes")
    args = ap.parse_args()
    if args.screen_nodes is not None:
        stability_grid.APEX_SCREEN_REFINEMENT = args.screen_nodes
    if args.caps == "mix":
        inputs = draw_caps(args.count, args.seed, 1 / 3)
    else:
        inputs = make_inputs(np.random.default_rng(args.seed).uniform(6.0, 30.0, args.count), load="apex_force")
    model = make_model("shallow_cap", {"check_bistability": False, "path_samples": 8})
    timed(screened_scan, "compute_mode_determinants",
          lambda a, k: "screen" if k.get("screen") else "stability grid")
    timed(solver, "_trace_paths", lambda a, k: "trace")
    timed(solver, "refine_bifurcations", lambda a, k: "bifurcation refinement")
    model.solve_batch(inputs)
    SECONDS.clear()
    t = time.process_time()
    model.solve_batch(inputs)
    total = time.process_time() - t
    print(f"{args.count} {args.caps} apex-force caps, shallow_cap {model.version}: "
          f"{1e3 * total / args.count:.1f} ms/point")
    for phase, seconds in SECONDS.most_common():
        print(f"  {phase:24s} {1e3 * seconds / args.count:6.1f} ms/point")
    other = total - sum(SECONDS.values())
    print(f"  {'other':24s} {1e3 * other / args.count:6.1f} ms/point")


if __name__ == "__main__":
    main()
