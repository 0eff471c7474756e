"""Plug-in model sweep: pipe liners of an invented lab, through the ``elastic_ring`` plug-in.

Invented scenario: the Fenwick pipe-liner lab relines culverts of 1 m diameter with plastic
tubes (E = 1 GPa) grouted into the old pipe, and wants the external (groundwater) pressure at
which a liner buckles, over wall thickness and grout stiffness. The model comes from the
example plug-in package in examples/elastic_ring_plugin (``pip install
examples/elastic_ring_plugin``); sweepshell finds it through its ``sweepshell.models`` entry
point and records the package in the store. Prints the critical pressure of the ungrouted
10 mm liner and the gain the stiffest grout gives.

Run: ``python examples/plugin_sweep.py`` (writes results/fenwick_liners.zarr).
"""

from __future__ import annotations

import sweepshell
from sweepshell.config.loader import build_plan

plan = build_plan({
    "name": "fenwick_liners",
    "model": "elastic_ring",
    "fixed": {"radius": 0.5, "youngs_modulus": 1.0e9, "poisson_ratio": 0.45, "pressure": 20_000.0},
    "axes": {"thickness": {"linspace": [0.01, 0.03, 5]},
             "foundation_modulus": {"logspace": [4, 7, 4]}},
    "executor": {"kind": "threads", "workers": 1},
})
print(sweepshell.run_sweep(plan).to_line())
ds = sweepshell.open_sweep(plan.store_path).load()
print(ds.sweep)
print(f"model from package {ds.attrs['model_package']} {ds.attrs['model_package_version']}")
bare = build_plan({"name": "fenwick_bare", "model": "elastic_ring",
                   "fixed": {"radius": 0.5, "youngs_modulus": 1.0e9, "poisson_ratio": 0.45, "pressure": 20_000.0,
                             "foundation_modulus": 0.0},
                   "axes": {"thickness": [0.01, 0.02]}, "executor": {"kind": "threads", "workers": 1}})
sweepshell.run_sweep(bare)
p_bare = sweepshell.open_sweep(bare.store_path).critical_pressure.sel(thickness=0.01).values.item()
p_grouted = ds.critical_pressure.sel(thickness=0.01, foundation_modulus=1.0e7).values.item()
print(f"ungrouted 10 mm liner buckles at {p_bare:.1f} Pa")
print(f"grout of 1e7 Pa/m raises that {p_grouted / p_bare:.1f}-fold (mode n = "
      f"{ds.mode_number.sel(thickness=0.01, foundation_modulus=1.0e7).values.item():.0f})")
table = ds.sweep.query('regime == "round"', ["critical_pressure", "safety_factor"])
print(f"{len(table)} of {ds.status.size} liner designs stay round at 20 kPa")
print(sweepshell.CAUTION)
