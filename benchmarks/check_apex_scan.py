"""Does the screened apex-force scan find the same critical states as evaluating every step? And how fast?

Random apex-force caps (λ 6 … 30, both edges and in-plane edges, ν, ``--dimpled`` a third dimpled)
are solved twice in the same run with the asymmetric scan: screened (``shallow_cap``'s
default: a cheap screening grid first, the stability grid where a screening sign changes, see
``sweepshell/models/shallow_cap/screened_scan.py``) and unscreened (the stability grid at every
path step). Both must give the same statuses, wave numbers and critical loads (``--rtol``).
Prints every disagreement, the wall time per point of both (best of ``--repeats``, as a ratio)
and the determinant work per point (flops of the reduced matrices' product and LU, a
machine-independent measure); exits 1 on any disagreement.

Run: ``python benchmarks/check_apex_scan.py [--caps 200] [--seed 3]`` (unscreened: about
0.2 s per cap on one core). ``--screen-nodes`` and ``--filter`` try other screening grids.
"""

from __future__ import annotations

import argparse
import sys
import time
from collections.abc import Iterator

import numpy as np

from sweepshell.models import make_model
from sweepshell.models.shallow_cap import modes, scan, stability_grid


def draw_caps(n: int, seed: int, dimpled_share: float) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    dimpled = rng.random(n) < dimpled_share
    caps = {"shell_parameter": rng.uniform(6.0, 30.0, n), "poisson_ratio": rng.choice([0.25, 0.3, 0.4, 0.45], n),
            "edge": rng.choice(["clamped", "pinned"], n), "edge_inplane": rng.choice(["immovable", "sliding"], n),
            "load": np.array(["apex_force"] * n),
            "dimple_amplitude": np.where(dimpled, rng.uniform(0.05, 1.0, n), 0.0),
            "dimple_width": rng.uniform(1.0, 4.0, n),
            "mismatch_strain": np.full(n, -8.0), "mismatch_radius": np.full(n, 0.5),
            "mismatch_region": np.array(["disc"] * n)}
    for k in ("thickness", "sphere_radius", "base_radius", "youngs_modulus"):
        caps[k] = np.full(n, np.nan)
    return caps


class WorkCounter:
    """Counts the flops of the reduced stability matrices built (product ~2M³, LU ~2M³/3)."""

    def __init__(self) -> None:
        self.flops = 0.0
        self._orig = modes._reduced_matrices

    def __enter__(self) -> WorkCounter:
        orig = self._orig

        def counted(problem, co, wave):  # type: ignore[no-untyped-def]
            items: Iterator = orig(problem, co, wave)
            for item in items:
                k, m, _ = item[2].shape
                self.flops += k * m**3 * 8.0 / 3.0
                yield item

        modes._reduced_matrices = counted
        return self

    def __exit__(self, *exc: object) -> None:
        modes._reduced_matrices = self._orig


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--caps", type=int, default=200)
    ap.add_argument("--seed", type=int, default=3)
    ap.add_argument("--rtol", type=float, default=1e-8)
    ap.add_argument("--dimpled", type=float, default=1 / 3,
                    help="share of dimpled caps (their grids are up to 96 nodes, 288 on the stability grid: slow)")
    ap.add_argument("--repeats", type=int, default=1, help="timed runs of each (best kept)")
    ap.add_argument("--screen-nodes", type=float, default=None, help="screening grid over state nodes")
    ap.add_argument("--filter", type=float, nargs=2, default=None, metavar=("ALPHA", "ORDER"))
    args = ap.parse_args()
    if args.screen_nodes is not None:
        stability_grid.APEX_SCREEN_REFINEMENT = args.screen_nodes
    if args.filter is not None:
        stability_grid.APEX_SCREEN_FILTER = tuple(args.filter)
    caps = draw_caps(args.caps, args.seed, args.dimpled)
    model = make_model("shallow_cap", {"check_bistability": False, "path_samples": 8})
    results, seconds, work = {}, {}, {}
    for flag in (True, False):  # warm the grids and operators of both
        scan.SCREEN_APEX = flag
        model.solve_batch({k: v[:8] for k, v in caps.items()})
    for _ in range(args.repeats):
        for flag in (False, True):
            scan.SCREEN_APEX = flag
            with WorkCounter() as counter:
                t = time.perf_counter()
                results[flag] = model.solve_batch(caps)
                dt = time.perf_counter() - t
            seconds[flag] = min(seconds.get(flag, np.inf), dt / args.caps)
            work[flag] = counter.flops / args.caps
    scan.SCREEN_APEX = True
    got, want = results[True], results[False]
    a, b = got.outputs["critical_load"], want.outputs["critical_load"]
    both = np.isfinite(a) & np.isfinite(b)
    rel = np.where(both, np.abs(a - b) / np.abs(np.where(both, b, 1.0)), 0.0)
    u, v = got.outputs["critical_wavenumber"], want.outputs["critical_wavenumber"]
    differs = (rel > args.rtol) | (np.isfinite(a) != np.isfinite(b)) | (got.status != want.status)
    differs |= ~((u == v) | (np.isnan(u) & np.isnan(v)))
    bad = np.nonzero(differs)[0]
    for i in bad:
        print(f"lambda {caps['shell_parameter'][i]:.4f} {caps['edge'][i]:7s} {caps['edge_inplane'][i]:9s} "
              f"nu {caps['poisson_ratio'][i]:.2f} dimple {caps['dimple_amplitude'][i]:.3f}/"
              f"{caps['dimple_width'][i]:.2f}: screened {a[i]:.10f} (status {got.status[i]}, n {u[i]:g}), "
              f"unscreened {b[i]:.10f} (status {want.status[i]}, n {v[i]:g})")
    found = int(np.isfinite(b).sum())
    bif = int(np.count_nonzero(v > 0))
    agreeing = rel[np.setdiff1d(np.arange(rel.size), bad)]
    print(f"apex-force scan, {args.caps} caps: {bad.size} disagreements above {args.rtol:g}; largest agreeing "
          f"difference {agreeing.max() if agreeing.size else 0.0:.1e}; critical states {found} ({bif} bifurcations)")
    print(f"wall per point: screened {seconds[True] * 1e3:.1f} ms, unscreened {seconds[False] * 1e3:.1f} ms, "
          f"ratio {seconds[False] / seconds[True]:.2f}x; determinant work per point: screened "
          f"{work[True] / 1e6:.0f} MFlop, unscreened {work[False] / 1e6:.0f} MFlop, ratio "
          f"{work[False] / work[True]:.2f}x")
    return 1 if bad.size else 0


if __name__ == "__main__":
    sys.exit(main())
