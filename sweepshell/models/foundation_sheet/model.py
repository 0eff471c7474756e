"""``foundation_sheet``: wrinkle patterns of a compressed film bonded to a soft substrate.

Governing equations
-------------------
A thin elastic film (thickness h, Young's modulus E_f, Poisson ratio ν_f, plane-strain
modulus Ē_f = E_f/(1−ν_f²), bending stiffness D = Ē_f h³/12) is bonded to a substrate and
loaded by a biaxial compressive mismatch strain (ε₁, ε₂) = (``strain_x``, ``strain_y``),
compressive positive. Föppl–von Kármán energy per unit area of a doubly periodic square
cell, with the in-plane displacements eliminated exactly through the Airy stress function χ
(∇⁴χ = −E_f h (w_xx w_yy − w_xy²))::

    Π[w] = ½ ē:C:ē + (1/2E_f h)⟨(∇²χ)²⟩ + ½ Σ_k (D|k|⁴ + K(k)) |ŵ_k|²,
    ē = ½⟨∇w ⊗ ∇w⟩ − diag(ε₁, ε₂),   C = Ē_f h[(1−ν_f) 𝟙 + ν_f I⊗I],

with the substrate stiffness per unit area of mode k

* ``half_space``: K(k) = Ē_s |k|/2, Ē_s = E_s/(1−ν_s²) (elastic half-space, shear tractions
  neglected);
* ``winkler``: K = Ē_s k_h/2, a local spring bed equal to the half-space stiffness at the
  half-space critical wavenumber k_h = (3Ē_s/Ē_f)^{1/3}/h (so the two substrates can be
  compared at the same material pair).

Linear onset (uniaxial, plane strain ε₂ = 0), the scales of the problem:

* half-space: k₀h = (3Ē_s/Ē_f)^{1/3}, ε_c = ¼(3Ē_s/Ē_f)^{2/3}, λ_c = 2πh(Ē_f/3Ē_s)^{1/3};
  post-onset stripes w = A cos(k₀x) with A = h√(ε/ε_c − 1);
* Winkler: k₀ = (K/D)^{1/4}, ε_c = 2√(DK)/(Ē_f h), λ_c = 2π(D/K)^{1/4};
  A = h√(2/3)√(ε/ε_c − 1).

Non-dimensionalisation
----------------------
Lengths in 1/k₀, height in b = √ε_c/k₀ (b = h/2 half-space, h/√6 Winkler), energy in
Ē_f h ε_c², strains in ε_c. The scaled problem depends only on the substrate kind, ν_f,
(ε₁, ε₂)/ε_c, the cell size (``cell_wavelengths`` λ_c per side) and the grid (``modes``
points per side). The flat film of the cell is unstable when
``overstress = max(ε₁ + ν_f ε₂, ε₂ + ν_f ε₁)/ε_c`` exceeds 1 (on the grid modes).
Equilibria are found by L-BFGS on the pseudo-spectral energy from small seeded random
heights, one run per seed, keeping the lowest energy (see
:mod:`sweepshell.models.foundation_sheet.energy`); the regime comes from the equilibrium spectrum
and the local orientation of the height field (rule in
:mod:`sweepshell.models.foundation_sheet.patterns`). With ``mirror_starts`` (default) every seed also
runs on the mirrored problem (ε₁ and ε₂ swapped) and its equilibrium, transposed, joins the
candidates: an isotropic film on a square cell has the same equilibria up to that mirror,
so the points (ε₁, ε₂) and (ε₂, ε₁) choose among the same candidates and the map is
symmetric under strain_x ↔ strain_y. ``pattern_confidence`` is the share of converged
starts whose equilibrium has the chosen pattern: 1 where every start agrees, lower where
several patterns are (meta)stable and the choice rests on small energy differences.

Resolution as a parameter
-------------------------
``modes`` (grid points per cell side) and ``cell_wavelengths`` are parameters, not
settings: they change the answer (the cell quantises the admissible wavevectors, the grid
resolves |k| ≤ modes/3 cycles per cell), so a sweep can vary them and the store records
them per point. Every combination must satisfy ``modes ≥ 4·cell_wavelengths``
(checked at plan time). Default 64 × 64 on an 8-wavelength cell resolves up to 2.6 k₀.

Statuses
--------
``no_instability`` (regime ``flat``) when no resolved mode of the cell is unstable: the
flat film is then the global minimum, because every quartic term of Π is non-negative;
``ok`` when the lowest-energy converged seed is kept; ``not_converged`` when no seed met
the gradient tolerance within ``max_iterations``; ``failed`` on floating-point trouble;
``outside_validity`` as below. Outputs are NaN wherever the status is not trusted.

Range of validity
-----------------
Large modulus contrast (Ē_f/Ē_s ≳ 10; points below ``min_contrast`` are
``outside_validity``), small strains and moderate slopes (FvK; strains above
``max_strain`` are ``outside_validity``), a film thin against the wavelength, a substrate
much thicker than the wavelength (half-space). No delamination, no plasticity, no
substrate nonlinearity, so folds and period doubling at large overstress are absent.

References (checked by the tests)
---------------------------------
Allen 1969, *Analysis and design of structural sandwich panels*; Chen & Hutchinson 2004,
*J. Appl. Mech.* 71:597; Huang, Hong & Suo 2005, *JMPS* 53:2101 (onset, wavelength,
amplitude); Hetényi 1946 (Winkler onset); Audoly & Boudaoud 2008, *JMPS* 56:2401 and
Cai, Breid, Crosby, Suo & Hutchinson 2011, *JMPS* 59:1094 (biaxial patterns, qualitative).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any, ClassVar

import numpy as np

from sweepshell.errors import ParameterError
from sweepshell.models.base import BatchResult, OutputSpec, ParameterSpec, Status, SweepModel
from sweepshell.models.foundation_sheet.patterns import PATTERN_NAMES
from sweepshell.models.foundation_sheet.point import fill_point_outputs, solve_sheet_point
from sweepshell.models.foundation_sheet.scales import MIN_MODES_PER_WAVELENGTH, compute_sheet_scales

__all__ = ["FoundationSheetModel", "compute_sheet_scales"]


class FoundationSheetModel(SweepModel):
    """Wrinkle patterns of a biaxially compressed film on a half-space or Winkler substrate.

    Parameters
    ----------
    seeds
        Random seeds of the initial perturbations; every point runs each seed and keeps the
        lowest-energy equilibrium. The same seeds for every point (batch-invariant).
    perturbation
        Rms of the initial random height, in film thicknesses.
    gradient_tolerance
        L-BFGS stopping tolerance on the largest gradient component of the preconditioned
        (unit-Hessian) variable.
    max_iterations
        L-BFGS iteration cap per seed; a point whose seeds all hit it is ``not_converged``.
    height_samples
        Points per side of the coarse ``height`` output (0 turns the output off).
    flat_tolerance
        Rms height, in film thicknesses, at or below which a point is ``flat``.
    min_contrast
        Smallest Ē_f/Ē_s treated as valid (thin-film, stiff-on-soft theory).
    max_strain
        Largest |strain| treated as valid (small-strain FvK theory).
    mirror_starts
        Also run every seed on the mirrored problem (strains swapped) and keep the lowest
        energy of both (twice the cost; the map becomes mirror-symmetric).
    """

    name: ClassVar[str] = "foundation_sheet"
    # 1.1: mirrored starts and pattern_confidence (the regime of multistable points can change)
    version: ClassVar[str] = "1.1"
    summary: ClassVar[str] = ("wrinkle patterns of a biaxially compressed FvK film on a half-space "
                              "or Winkler substrate, pseudo-spectral energy minimisation")
    parameters: ClassVar[tuple[ParameterSpec, ...]] = (
        ParameterSpec("film_thickness", "m", "film thickness h", default=1e-6,
                      bounds=(0.0, math.inf), closed=(False, False), symbol="h"),
        ParameterSpec("film_modulus", "Pa", "Young's modulus of the film E_f", default=1e9,
                      bounds=(0.0, math.inf), closed=(False, False), symbol="E_f"),
        ParameterSpec("film_poisson_ratio", "1", "Poisson ratio of the film", default=0.3,
                      bounds=(-1.0, 0.5), closed=(False, True), symbol="ν_f"),
        ParameterSpec("substrate_modulus", "Pa", "Young's modulus of the substrate E_s", default=1e6,
                      bounds=(0.0, math.inf), closed=(False, False), symbol="E_s"),
        ParameterSpec("substrate_poisson_ratio", "1", "Poisson ratio of the substrate", default=0.45,
                      bounds=(-1.0, 0.5), closed=(False, True), symbol="ν_s"),
        ParameterSpec("substrate", "1", "substrate model: elastic half-space or Winkler bed",
                      default="half_space", choices=("half_space", "winkler")),
        ParameterSpec("strain_x", "1", "compressive mismatch strain along x (compression positive)",
                      default=0.0, bounds=(-0.5, 0.5), symbol="ε₁"),
        ParameterSpec("strain_y", "1", "compressive mismatch strain along y (compression positive)",
                      default=0.0, bounds=(-0.5, 0.5), symbol="ε₂"),
        ParameterSpec("cell_wavelengths", "1", "side of the periodic cell in critical wavelengths",
                      default=8, bounds=(1, 64), integer=True, symbol="L/λ_c"),
        ParameterSpec("modes", "1", "grid points per cell side (resolved modes: a third of them)",
                      default=64, bounds=(8, 512), integer=True, symbol="n"),
    )
    regimes: ClassVar[tuple[str, ...]] = PATTERN_NAMES
    #: seconds per point on one core, between the stripe and labyrinth costs recorded in theory.md
    cost_hint: ClassVar[float] = 0.7

    def __init__(self, *, seeds: Sequence[int] = (1, 2, 3), perturbation: float = 0.01,
                 gradient_tolerance: float = 1e-4, max_iterations: int = 4000,
                 height_samples: int = 16, flat_tolerance: float = 1e-3,
                 min_contrast: float = 5.0, max_strain: float = 0.2, mirror_starts: bool = True) -> None:
        super().__init__()
        seed_list = [int(s) for s in seeds]
        if not seed_list:
            raise ParameterError("settings.seeds=[] is empty; give at least one integer seed",
                                 field="settings.seeds", value=list(seeds))
        if int(height_samples) < 0:
            raise ParameterError(f"settings.height_samples={height_samples} is negative; use 0 (off) "
                                 "or a positive count", field="settings.height_samples",
                                 value=height_samples)
        self._settings = {"seeds": seed_list, "perturbation": float(perturbation),
                          "gradient_tolerance": float(gradient_tolerance),
                          "max_iterations": int(max_iterations), "height_samples": int(height_samples),
                          "flat_tolerance": float(flat_tolerance), "min_contrast": float(min_contrast),
                          "max_strain": float(max_strain), "mirror_starts": bool(mirror_starts)}

    def estimated_cost(self) -> float:
        return self.cost_hint * (2.0 if self._settings["mirror_starts"] else 1.0)

    # -- declarations -----------------------------------------------------------------
    @property
    def outputs(self) -> tuple[OutputSpec, ...]:
        specs = [
            OutputSpec("critical_strain", "1", "uniaxial plane-strain critical mismatch strain",
                       symbol="ε_c"),
            OutputSpec("critical_wavelength", "m", "wavelength of the critical wrinkle mode",
                       symbol="λ_c"),
            OutputSpec("overstress", "1", "largest flat-film compressive stress over the critical one",
                       symbol="σ/σ_c"),
            OutputSpec("wavelength", "m", "dominant wavelength of the equilibrium (NaN where flat)",
                       symbol="λ", nullable=True),
            OutputSpec("amplitude_rms", "m", "rms height of the equilibrium about its mean"),
            OutputSpec("amplitude_peak", "m", "half the peak-to-valley height of the equilibrium"),
            OutputSpec("energy", "J m-2", "energy per unit area relative to the flat compressed film",
                       symbol="ΔΠ"),
            OutputSpec("pattern_confidence", "1", "share of converged starts (seeds, both mirror orientations) "
                       "ending in the chosen pattern; below 1 where states are multistable"),
        ]
        if self._settings["height_samples"] > 0:
            specs.append(OutputSpec("height", "m", "equilibrium height sampled on a coarse grid of the cell",
                                    dims=("height_y", "height_x"), symbol="w"))
        return tuple(specs)

    @property
    def extra_dims(self) -> dict[str, int]:
        k = self._settings["height_samples"]
        return {"height_y": k, "height_x": k} if k > 0 else {}

    def extra_coords(self) -> dict[str, np.ndarray]:
        """Sample positions as fractions of the cell side (the cell size varies per point)."""
        k = self._settings["height_samples"]
        if k == 0:
            return {}
        frac = np.arange(k, dtype=float) / k
        return {"height_y": frac, "height_x": frac.copy()}

    @classmethod
    def check_combination(cls, fixed: Mapping[str, Any], axes: Mapping[str, np.ndarray]) -> None:
        """Raise unless every combination resolves the critical mode (modes ≥ 4 × cells)."""
        def values(name: str) -> np.ndarray:
            if name in axes:
                return np.asarray(axes[name], dtype=float)
            if name in fixed:
                return np.asarray([fixed[name]], dtype=float)
            return np.asarray([cls.get_parameter(name).default], dtype=float)

        modes, cells = values("modes"), values("cell_wavelengths")
        if float(modes.min()) < MIN_MODES_PER_WAVELENGTH * float(cells.max()):
            raise ParameterError(
                f"modes={modes.min():g} is too coarse for cell_wavelengths={cells.max():g}; use modes "
                f"of at least {MIN_MODES_PER_WAVELENGTH} per cell wavelength "
                f"({MIN_MODES_PER_WAVELENGTH * cells.max():g})",
                field="modes", value=float(modes.min()),
                allowed=f">= {MIN_MODES_PER_WAVELENGTH} * cell_wavelengths")

    @classmethod
    def sample_inputs(cls) -> dict[str, np.ndarray]:
        """Return five cheap, telling points: flat, stripes, checkerboard, Winkler, invalid."""
        n = 5
        out: dict[str, np.ndarray] = {p.name: np.full(n, p.default, dtype=float) for p in cls.parameters
                                      if p.choices is None}
        out["substrate"] = np.array(["half_space", "half_space", "half_space", "winkler", "half_space"])
        out["modes"][:] = 16.0
        out["cell_wavelengths"][:] = 2.0
        eps_c = compute_sheet_scales(out["film_thickness"], out["film_modulus"], out["film_poisson_ratio"],
                                     out["substrate_modulus"], out["substrate_poisson_ratio"],
                                     out["substrate"])["critical_strain"]
        near = 1.05 / (1.0 + out["film_poisson_ratio"][2])
        out["strain_x"] = eps_c * np.array([0.5, 1.5, near, 1.4, 0.0]) + np.array([0, 0, 0, 0, 0.3])
        out["strain_y"] = eps_c * np.array([0.2, 0.0, near, 0.0, 0.0])
        return out

    # -- work ---------------------------------------------------------------------------
    def solve_batch(self, inputs: Mapping[str, np.ndarray]) -> BatchResult:
        nu = np.asarray(inputs["film_poisson_ratio"], dtype=float)
        substrate = np.asarray(inputs["substrate"]).astype(str)
        scales = compute_sheet_scales(inputs["film_thickness"], inputs["film_modulus"], nu,
                                      inputs["substrate_modulus"], inputs["substrate_poisson_ratio"],
                                      substrate)
        e1 = np.asarray(inputs["strain_x"], dtype=float)
        e2 = np.asarray(inputs["strain_y"], dtype=float)
        cells = np.asarray(inputs["cell_wavelengths"], dtype=float).round().astype(int)
        modes = np.asarray(inputs["modes"], dtype=float).round().astype(int)
        h = np.asarray(inputs["film_thickness"], dtype=float)
        n = e1.shape[0]
        s = self._settings
        result = self.empty_result(n)
        out, status, regime = result.outputs, result.status, result.regime
        eps_c = scales["critical_strain"]
        s1, s2 = e1 / eps_c, e2 / eps_c
        overstress = np.maximum(s1 + nu * s2, s2 + nu * s1)
        valid = ((scales["contrast"] >= s["min_contrast"])
                 & (np.maximum(np.abs(e1), np.abs(e2)) <= s["max_strain"])
                 & (modes >= MIN_MODES_PER_WAVELENGTH * cells))
        status[~valid] = Status.outside_validity
        iterations = np.zeros(n, dtype=np.int64)
        seed_energies = np.full((n, len(s["seeds"])), np.nan)
        for i in np.flatnonzero(valid):
            b, ratio = scales["height_scale"][i], scales["height_scale"][i] / h[i]
            try:
                with np.errstate(all="raise", under="ignore"):
                    answer = solve_sheet_point(int(modes[i]), int(cells[i]), str(substrate[i]), float(nu[i]),
                                               (float(s1[i]), float(s2[i])), ratio, s, seed_energies[i])
                    if answer.height is None:
                        status[i] = answer.status
                        continue
                    iterations[i] = answer.iterations
                    fill_point_outputs(out, int(i), answer.height * b, h[i],
                                       answer.energy * scales["energy_scale"][i],
                                       scales["critical_wavelength"][i] * cells[i], s["flat_tolerance"])
                    out["pattern_confidence"][i] = answer.confidence
                    regime[i] = answer.pattern
            except (FloatingPointError, ValueError, np.linalg.LinAlgError):
                status[i] = Status.failed
                regime[i] = -1
                for v in out.values():
                    v[i] = np.nan
                continue
            status[i] = answer.status
            out["critical_strain"][i] = eps_c[i]
            out["critical_wavelength"][i] = scales["critical_wavelength"][i]
            out["overstress"][i] = overstress[i]
        return BatchResult(outputs=out, status=status, regime=regime,
                           diagnostics={"iterations": iterations, "seed_energies": seed_energies})
