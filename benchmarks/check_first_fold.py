"""Does the continuation find the critical state? Random caps against a careful continuation.

The default turn limit and step sizing of ``shallow_cap`` are checked against the same model
with a 2.5° turn limit (about three times as many steps): both must report the same first
pressure maximum (``--analysis limit``), the same critical state with the asymmetric scan
(``scan``: load and wave number) or the same limit point and bistability flag (``bistable``:
the path is followed past the first maximum). Caps are drawn at random (edge, in-plane edge, ν,
dimple amplitude and width, λ up to 30), a tenth of them in λ 23.5 … 27, where the first
maximum jumps between folds. Prints every disagreement above ``--rtol`` and a summary; exits 1
if there is any.

Run: ``python benchmarks/check_first_fold.py [--caps 3000] [--seed 7] [--analysis limit]``
(limit: about ten seconds per thousand caps on one core; scan: a few minutes). Re-run it after
any change to the step rules.
"""

from __future__ import annotations

import argparse
import sys
import time

import numpy as np

from sweepshell.models import make_model


def draw_caps(n: int, seed: int) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    lam = rng.uniform(3.5, 30.0, n)
    lam[: n // 10] = rng.uniform(23.5, 27.0, n // 10)
    dimpled = rng.random(n) < 0.4
    caps = {"shell_parameter": lam, "poisson_ratio": rng.choice([0.25, 0.3, 0.4, 0.45], n),
            "edge": rng.choice(["clamped", "pinned"], n, p=[0.6, 0.4]),
            "edge_inplane": rng.choice(["immovable", "sliding"], n, p=[0.75, 0.25]),
            "load": np.array(["pressure"] * n),
            "dimple_amplitude": np.where(dimpled, rng.uniform(0.01, 1.0, n), 0.0),
            "dimple_width": rng.uniform(1.0, 4.0, n),
            "mismatch_strain": np.full(n, -8.0), "mismatch_radius": np.full(n, 0.5),
            "mismatch_region": np.array(["disc"] * n)}
    for k in ("thickness", "sphere_radius", "base_radius", "youngs_modulus"):
        caps[k] = np.full(n, np.nan)
    return caps


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--caps", type=int, default=3000)
    ap.add_argument("--seed", type=int, default=7)
    ap.add_argument("--rtol", type=float, default=1e-8)
    ap.add_argument("--careful-turn", type=float, default=2.5)
    ap.add_argument("--analysis", choices=["limit", "scan", "bistable"], default="limit")
    ap.add_argument("--max-points", type=int, default=None,
                    help="path capacity of the checked run (default: the model's; the careful run has 4000)")
    ap.add_argument("--turn", type=float, default=None, help="turn limit of the checked run (default: the model's)")
    args = ap.parse_args()
    caps = draw_caps(args.caps, args.seed)
    base = {"asymmetric_modes": 0, "check_bistability": args.analysis == "bistable", "max_pressure": 3.0}
    if args.analysis == "scan":
        del base["asymmetric_modes"]
    t = time.perf_counter()
    checked = dict(base)
    if args.turn is not None:
        checked["max_turn_deg"] = args.turn
    if args.max_points is not None:
        checked["max_points"] = args.max_points
    got = make_model("shallow_cap", checked).solve_batch(caps)
    t_default = time.perf_counter() - t
    t = time.perf_counter()
    want = make_model("shallow_cap", {**base, "max_turn_deg": args.careful_turn, "max_points": 4000}).solve_batch(caps)
    t_careful = time.perf_counter() - t
    a, b = got.outputs["critical_load"], want.outputs["critical_load"]
    both = np.isfinite(a) & np.isfinite(b)
    rel = np.where(both, np.abs(a - b) / np.abs(b), 0.0)
    differs = (rel > args.rtol) | (np.isfinite(a) != np.isfinite(b)) | (got.status != want.status)
    for name in ("critical_wavenumber", "bistable"):
        u, v = got.outputs[name], want.outputs[name]
        differs |= ~((u == v) | (np.isnan(u) & np.isnan(v)))
    bad = np.nonzero(differs)[0]
    for i in bad:
        print(f"lambda {caps['shell_parameter'][i]:.4f} {caps['edge'][i]:7s} {caps['edge_inplane'][i]:9s} "
              f"nu {caps['poisson_ratio'][i]:.2f} dimple {caps['dimple_amplitude'][i]:.3f}/"
              f"{caps['dimple_width'][i]:.2f}: default {a[i]:.10f} (status {got.status[i]}, n "
              f"{got.outputs['critical_wavenumber'][i]:g}, bistable {got.outputs['bistable'][i]:g}), careful "
              f"{b[i]:.10f} (status {want.status[i]}, n {want.outputs['critical_wavenumber'][i]:g}, bistable "
              f"{want.outputs['bistable'][i]:g})")
    agreeing = rel[np.setdiff1d(np.arange(rel.size), bad)]
    print(f"{args.analysis}, {args.caps} caps: {bad.size} disagreements above {args.rtol:g}; "
          f"largest agreeing difference {agreeing.max():.1e}; critical states found {int(both.sum())}; "
          f"default {t_default:.1f} s, careful ({args.careful_turn:g} deg) {t_careful:.1f} s")
    return 1 if bad.size else 0


if __name__ == "__main__":
    sys.exit(main())
