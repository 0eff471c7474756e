"""One point of ``foundation_sheet``: seeded minimisations, the chosen equilibrium and its measured outputs.

The model class (:mod:`sweepshell.models.foundation_sheet.model`) maps public parameters to the
scaled cell problem and calls :func:`solve_sheet_point` per valid point; the rule it applies
(every seed, optionally on the mirrored problem too, the lowest converged energy wins, the
share of starts agreeing on its pattern is the confidence) is stated in the model's docstring.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from sweepshell.models.base import Status
from sweepshell.models.foundation_sheet.energy import (
    SheetProblem,
    build_sheet_problem,
    compute_height_field,
    project_field_to_modes,
)
from sweepshell.models.foundation_sheet.minimize import SheetMinimum, minimize_sheet_energy
from sweepshell.models.foundation_sheet.patterns import (
    PATTERN_NAMES,
    classify_pattern,
    measure_pattern,
    measure_peak_amplitude,
)

__all__ = ["SheetPointAnswer", "fill_point_outputs", "sample_periodic_field", "solve_sheet_point"]


@dataclass(frozen=True)
class SheetPointAnswer:
    """The answer of one point in scaled units.

    Attributes
    ----------
    status
        :class:`Status` code (``ok``, ``no_instability`` or ``not_converged``).
    energy
        Scaled energy of the chosen equilibrium over the flat film (units of Ē_f h ε_c²).
    height
        Scaled height field (units of b) on the n × n grid; None when not converged.
    confidence
        Share of converged starts ending in the chosen pattern.
    iterations
        L-BFGS iterations of the chosen start.
    pattern
        Index into ``PATTERN_NAMES`` of the chosen equilibrium (-1 when not converged).
    """

    status: int
    energy: float
    height: np.ndarray | None
    confidence: float
    iterations: int
    pattern: int = -1


def solve_sheet_point(modes: int, cells: int, substrate: str, nu: float, overstrain: tuple[float, float],
                      height_ratio: float, settings: Mapping[str, Any],
                      seed_energies: np.ndarray) -> SheetPointAnswer:
    """Return the equilibrium of one point (scaled); ``seed_energies`` receives each seed's energy.

    ``height_ratio`` is b/h (the height unit over the film thickness); ``settings`` the model's
    settings (seeds, perturbation, tolerances, ``mirror_starts``, ``flat_tolerance``).
    """
    s1, s2 = overstrain
    problem = build_sheet_problem(modes, cells, substrate, nu, (s1, s2))
    if problem.linear_stability_margin() >= 0.0:
        return SheetPointAnswer(Status.no_instability, 0.0, np.zeros((problem.n, problem.n)), 1.0, 0,
                                PATTERN_NAMES.index("flat"))
    found = _run_seeds(problem, height_ratio, settings, seed_energies)
    if settings["mirror_starts"] and s1 != s2:
        mirrored = build_sheet_problem(modes, cells, substrate, nu, (s2, s1))
        unused = np.full(len(settings["seeds"]), np.nan)
        # heights of the mirrored problem transposed back: every candidate is an equilibrium of ``problem``
        found += [(e, w.T.copy(), it) for e, w, it in _run_seeds(mirrored, height_ratio, settings, unused)]
    if not found:
        return SheetPointAnswer(Status.not_converged, np.nan, None, np.nan, 0)
    best = min(range(len(found)), key=lambda j: found[j][0])
    energy, height, iterations = found[best]
    flat_amplitude = settings["flat_tolerance"] / height_ratio
    patterns = [classify_pattern(measure_pattern(c[1]), flat_amplitude) for c in found]
    chosen = patterns[best]
    return SheetPointAnswer(Status.ok, energy, height, patterns.count(chosen) / len(patterns), iterations, chosen)


def _run_seeds(problem: SheetProblem, height_ratio: float, settings: Mapping[str, Any],
               seed_energies: np.ndarray) -> list[tuple[float, np.ndarray, int]]:
    """Run every seed on ``problem``; return the converged minima as ``(energy, height, iterations)``.

    The energies of finite minima are recorded in ``seed_energies``.
    """
    converged: list[SheetMinimum] = []
    for j, seed in enumerate(settings["seeds"]):
        # white noise on the grid, projected onto the resolved modes: depends only on
        # the seed and the grid, never on the point or its place in the batch
        grid_noise = np.random.default_rng(seed).standard_normal((problem.n, problem.n))
        z0 = project_field_to_modes(problem, grid_noise)
        start_rms = float(np.sqrt(np.mean(compute_height_field(problem, z0) ** 2)))
        # initial rms height = perturbation × h, i.e. perturbation × h/b in scaled units
        z0 *= settings["perturbation"] / height_ratio / start_rms
        found = minimize_sheet_energy(problem, z0, gradient_tolerance=settings["gradient_tolerance"],
                                      max_iterations=settings["max_iterations"])
        if not found.finite:
            continue
        seed_energies[j] = found.energy
        if found.converged:
            converged.append(found)
    return [(m.energy, m.height, m.iterations) for m in converged]


def fill_point_outputs(out: dict[str, np.ndarray], i: int, height: np.ndarray, thickness: float, energy: float,
                       cell_size: float, flat_tolerance: float) -> None:
    """Write the measured outputs of point i from its equilibrium height (m)."""
    measures = measure_pattern(height)
    flat = measures.rms <= flat_tolerance * thickness
    out["amplitude_rms"][i] = measures.rms
    out["amplitude_peak"][i] = 0.0 if flat else measure_peak_amplitude(height)
    out["energy"][i] = energy
    out["wavelength"][i] = np.nan if flat else cell_size / measures.wavenumber
    if "height" in out:
        out["height"][i] = sample_periodic_field(height, out["height"].shape[1])


def sample_periodic_field(field: np.ndarray, samples: int) -> np.ndarray:
    """Return a band-limited periodic field evaluated on a ``samples`` × ``samples`` grid.

    Exact evaluation of the Fourier series at the coarse points (no aliasing of the
    sampled values), positions ``j/samples`` of the cell side.
    """
    n = field.shape[0]
    F = np.fft.fft2(field) / field.size
    m = np.fft.fftfreq(n, 1.0 / n)
    nyquist = np.abs(m) >= n / 2
    F[nyquist, :] = 0.0  # a band-limited field has no Nyquist content; drop round-off
    F[:, nyquist] = 0.0
    x = np.arange(samples) / samples
    E = np.exp(2j * np.pi * np.outer(x, m))
    return (E @ F @ E.T).real
