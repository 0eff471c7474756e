"""Film study with a plot: when and how finely does a coating on silicone wrinkle?

Invented scenario: the Orrin soft-optics group coats a silicone sheet (1.5 MPa) with a 200 nm
glassy film (2 GPa) and stretches it before coating, so the film ends up squeezed along x by a
mismatch strain. The sweep runs five strains around onset and draws the wrinkle amplitude
against strain beside the small-slope estimate h·sqrt(ε/ε_c − 1) (Huang, Hong & Suo 2005).
Prints the critical strain and wavelength of the pair.

Run: ``python examples/film_study.py`` (writes results/orrin_film.zarr and orrin_film.png).
"""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt
import numpy as np

import sweepshell
from sweepshell.config.loader import build_plan

plan = build_plan({
    "name": "orrin_film",
    "model": "foundation_sheet",
    "settings": {"seeds": [1], "height_samples": 4},
    "fixed": {"film_thickness": 2.0e-7, "film_modulus": 2.0e9, "film_poisson_ratio": 0.3,
              "substrate_modulus": 1.5e6, "substrate_poisson_ratio": 0.48, "substrate": "half_space",
              "strain_y": 0.0, "cell_wavelengths": 2, "modes": 24},
    "axes": {"strain_x": [0.003, 0.0055, 0.007, 0.0085, 0.01]},
    "executor": {"kind": "threads", "workers": 1},
})
print(sweepshell.run_sweep(plan).to_line())
ds = sweepshell.open_sweep(plan.store_path).load()
eps_c = float(ds.critical_strain[0])
wavelength_c = float(ds.critical_wavelength[0])
print(f"critical strain {eps_c:.5f}, critical wavelength {wavelength_c * 1e6:.3f} um")

h = 2.0e-7
strain = ds.strain_x.values
fig, ax = plt.subplots(figsize=(6.4, 4.2), layout="constrained")
ax.plot(strain * 100, ds.amplitude_peak.values * 1e9, "o", color="#1b6ca8", label="sweep (energy minimum)")
fine = np.linspace(eps_c, strain.max(), 100)
ax.plot(fine * 100, h * np.sqrt(fine / eps_c - 1) * 1e9, "-", color="#777777",
        label="h√(ε/ε_c − 1), Huang, Hong & Suo 2005")
ax.axvline(eps_c * 100, color="#bbbbbb", linestyle=":", label=f"onset ε_c = {eps_c * 100:.3f} %")
ax.set_xlabel("mismatch strain along x, ε (%)")
ax.set_ylabel("wrinkle amplitude, half peak-to-valley (nm)")
ax.set_title("200 nm film (2 GPa) on silicone (1.5 MPa), uniaxial squeeze", fontsize=10, loc="left")
ax.legend(fontsize=8, frameon=False, loc="upper left")
fig.savefig("orrin_film.png", dpi=120)
print("wrote orrin_film.png")
