"""Dome study from Python: how much does a dent cost a pressure-relief dome?

Invented scenario: Harlow Valves makes clamped steel burst domes (cap parameter λ = 4 and 8)
and asks how an apex dent of half the thickness changes the pressure at which they let go. The
sweep is built as a plain mapping (no YAML), run on local threads, and read back with the
``.sweep`` accessor. Prints the critical pressure of the perfect λ = 4 dome over the classical
value of a complete sphere, and the knock-down a dent causes at λ = 8.

Run: ``python examples/dome_study.py`` (writes results/harlow_domes.zarr in the current folder).
"""

from __future__ import annotations

import sweepshell
from sweepshell.config.loader import build_plan

plan = build_plan({
    "name": "harlow_domes",
    "model": "shallow_cap",
    "settings": {"asymmetric_modes": 12, "check_bistability": False, "path_samples": 8},
    "fixed": {"poisson_ratio": 0.3, "edge": "clamped", "load": "pressure", "dimple_width": 2.0},
    "axes": {"shell_parameter": [4.0, 8.0], "dimple_amplitude": [0.0, 0.5]},
    "executor": {"kind": "threads", "workers": 1},
})
summary = sweepshell.run_sweep(plan)
print(summary.to_line())

ds = sweepshell.open_sweep(plan.store_path).load()
print(ds.sweep)
table = ds.sweep.query(None, ["critical_load", "knockdown", "regime"])
print(table.to_string(index=False))
perfect = ds.critical_load.sel(shell_parameter=4.0, dimple_amplitude=0.0).values.item()
dented = ds.critical_load.sel(shell_parameter=8.0, dimple_amplitude=0.5).values.item()
clean = ds.critical_load.sel(shell_parameter=8.0, dimple_amplitude=0.0).values.item()
print(f"perfect lambda=4 dome snaps at p/p_cl = {perfect:.4f}")
print(f"a 0.5 h dent at lambda=8 keeps {dented / clean:.1%} of the perfect dome's critical pressure")
print(sweepshell.CAUTION)
