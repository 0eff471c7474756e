"""``foundation_sheet`` against published results (source named beside every check).

Tolerances: the single-harmonic stripe is an exact equilibrium of the discrete energy (its
membrane stress is uniform), so onset, wavelength and amplitude are limited only by the
minimiser tolerance; :func:`test_stripe_amplitude_is_resolution_independent` shows the
amplitude changes by < 1e-6 between 12 and 32 grid points per side (tight minimiser), and
the default minimiser tolerance leaves ~1e-5 relative, so 1e-3 relative is a safe bound.
Two-dimensional patterns converge spectrally (:func:`test_checkerboard_energy_converges_spectrally`).
"""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell.models import Status
from sweepshell.models.foundation_sheet.energy import (
    build_sheet_problem,
    compute_variable_of_height,
)
from sweepshell.models.foundation_sheet.minimize import minimize_sheet_energy
from sweepshell.models.foundation_sheet.model import FoundationSheetModel
from tests.models.foundation_sheet.test_model import sheet_inputs

H = 1e-6


def _solve(model: FoundationSheetModel, **columns):  # type: ignore[no-untyped-def]
    return model.solve_batch(sheet_inputs(model, film_thickness=[H] * len(next(iter(columns.values()))),
                                         **columns))


@pytest.mark.parametrize(("ratio", "wavelength_over_h", "critical_strain"), [
    (10.0, 9.386, 0.11204), (100.0, 20.221, 0.024137), (1000.0, 43.565, 0.0052002),
    (1e4, 93.858, 0.0011204)])
def test_onset_matches_reference_values(ratio: float, wavelength_over_h: float,
                                        critical_strain: float) -> None:
    # Allen 1969; Chen & Hutchinson 2004; Huang, Hong & Suo 2005: λ = 2πh(Ē_f/3Ē_s)^{1/3},
    # ε_c = ¼(3Ē_s/Ē_f)^{2/3}; check values [drv] from REFERENCES.md, quoted to 5 digits
    model = FoundationSheetModel(seeds=(1,), height_samples=0)
    res = _solve(model, film_modulus=[ratio * 1e6], film_poisson_ratio=[0.3],
                 substrate_poisson_ratio=[0.3], strain_x=[0.0])
    assert res.outputs["critical_wavelength"][0] / H == pytest.approx(wavelength_over_h, rel=6e-5)
    assert res.outputs["critical_strain"][0] == pytest.approx(critical_strain, rel=6e-5)


def test_plane_strain_moduli_enter_the_onset() -> None:
    # Chen & Hutchinson 2004: the formulas use Ē = E/(1−ν²) for film and substrate
    model = FoundationSheetModel(seeds=(1,), height_samples=0)
    res = _solve(model, film_modulus=[1e9], film_poisson_ratio=[0.3], substrate_modulus=[1e6],
                 substrate_poisson_ratio=[0.5], strain_x=[0.0])
    ratio = (1e9 / 0.91) / (1e6 / 0.75)
    assert res.outputs["critical_strain"][0] == pytest.approx(0.25 * (3 / ratio) ** (2 / 3), rel=1e-12)


@pytest.mark.parametrize("substrate", ["half_space", "winkler"])
def test_solver_finds_onset_wavelength_and_amplitude(substrate: str) -> None:
    # half-space: A = h√(ε/ε_c − 1) (Huang, Hong & Suo 2005; Chen & Hutchinson 2004);
    # Winkler bed: A = h√(2/3)√(ε/ε_c − 1) [drv: same single-mode energy with k₀²h² = 6ε_c]
    model = FoundationSheetModel(seeds=(1, 2), height_samples=0)
    over = np.array([0.98, 1.02, 1.1, 1.5, 2.0, 3.0])
    ec = 0.25 * (3 / 1000) ** (2 / 3) if substrate == "half_space" else None
    probe = _solve(model, substrate=[substrate], strain_x=[0.0])
    ec = float(probe.outputs["critical_strain"][0])
    res = _solve(model, substrate=[substrate] * len(over), strain_x=list(over * ec))
    assert res.status[0] == Status.no_instability and res.regime[0] == 0
    assert np.all(res.status[1:] == Status.ok) and np.all(res.regime[1:] == 1)
    factor = 1.0 if substrate == "half_space" else np.sqrt(2.0 / 3.0)
    expected = H * factor * np.sqrt(over[1:] - 1.0)
    np.testing.assert_allclose(res.outputs["amplitude_peak"][1:], expected, rtol=1e-3)
    np.testing.assert_allclose(res.outputs["amplitude_rms"][1:], expected / np.sqrt(2), rtol=1e-3)
    np.testing.assert_allclose(res.outputs["wavelength"][1:], res.outputs["critical_wavelength"][1:],
                               rtol=1e-6)
    # energy of the single-mode stripe: −(ε/ε_c − 1)²/2 in units of Ē_f h ε_c² [drv]
    ef = 1e9 / (1 - 0.3**2)
    np.testing.assert_allclose(res.outputs["energy"][1:] / (ef * H * ec**2), -0.5 * (over[1:] - 1) ** 2,
                               rtol=1e-5)


def test_stripe_amplitude_is_resolution_independent() -> None:
    # common practice, no source: the tolerance above is justified by this resolution test
    model = FoundationSheetModel(seeds=(1,), height_samples=0, gradient_tolerance=1e-8)
    ec = 0.25 * (3 / 1000) ** (2 / 3)
    res = _solve(model, strain_x=[1.5 * ec] * 3, modes=[12, 16, 32])
    amp = res.outputs["amplitude_peak"]
    assert np.ptp(amp) / amp.mean() < 1e-6
    assert amp.mean() == pytest.approx(H * np.sqrt(0.5), rel=1e-6)


def test_checkerboard_energy_converges_spectrally() -> None:
    # common practice, no source: observed order of the energy error vs grid size,
    # equibiaxial overstress 4 on a one-wavelength cell (strong harmonics)
    def energy(n: int) -> float:
        s = 4.0 / 1.3
        problem = build_sheet_problem(n, 1, "half_space", 0.3, (s, s))
        x = np.arange(n) / n * 2 * np.pi
        X, Y = np.meshgrid(x, x)
        z0 = compute_variable_of_height(problem, 0.5 * (np.cos(X) + np.cos(Y)))
        found = minimize_sheet_energy(problem, z0, gradient_tolerance=1e-8, max_iterations=5000)
        assert found.converged
        return found.energy

    reference = energy(48)
    sizes = np.array([9, 12, 15, 18])
    errors = np.array([abs(energy(int(n)) - reference) for n in sizes])
    order = -np.polyfit(np.log(sizes), np.log(errors), 1)[0]
    assert np.all(np.diff(errors) < 0)
    assert order > 8.0  # spectral: far above any fixed algebraic order
    assert errors[-1] < 1e-6 * abs(reference)


def test_equibiaxial_checkerboard_near_onset_and_its_energy() -> None:
    # Audoly & Boudaoud 2008 (value from memory, qualitative): equibiaxial compression just
    # above onset gives the checkerboard; its energy −(σ−1)²/[(1+ν) + (1−ν²)/2] is derived
    # here from the two-mode FvK energy [drv], σ = (1+ν)ε/ε_c
    nu, sigma = 0.3, 1.05
    s = sigma / (1 + nu)
    model = FoundationSheetModel(seeds=(1, 2), height_samples=0)
    ec = 0.25 * (3 / 1000) ** (2 / 3)
    res = _solve(model, strain_x=[s * ec], strain_y=[s * ec], modes=[32], cell_wavelengths=[4])
    assert res.status[0] == Status.ok
    assert model.regimes[res.regime[0]] == "checkerboard"
    ef = 1e9 / (1 - nu**2)
    scaled = res.outputs["energy"][0] / (ef * H * ec**2)
    assert scaled == pytest.approx(-((sigma - 1) ** 2) / ((1 + nu) + (1 - nu**2) / 2), rel=1e-3)


@pytest.mark.slow
def test_equibiaxial_overstress_sequence_checkerboard_herringbone_labyrinth() -> None:
    # Audoly & Boudaoud 2008; Chen & Hutchinson 2004; Cai et al. 2011 (value from memory,
    # qualitative): checkerboard near onset, herringbone at larger overstress, disordered
    # (labyrinth) patterns from random starts at large overstress; strongly unequal
    # compression gives stripes normal to the larger compression
    model = FoundationSheetModel(seeds=(1,), height_samples=0)
    ec = 0.25 * (3 / 1000) ** (2 / 3)
    sigma = np.array([1.05, 1.2, 2.0])
    s = sigma / 1.3
    res = _solve(model, strain_x=[*(s * ec), 2.5 * ec], strain_y=[*(s * ec), 0.2 * ec],
                 modes=[32, 64, 64, 64], cell_wavelengths=[4, 8, 8, 8])
    names = [model.regimes[r] for r in res.regime]
    # on this platform seed 1 gives herringbone at 1.2 and labyrinth at 2.0; which of the
    # two a random start reaches is not a published fact, so only the family is asserted
    assert names[0] == "checkerboard" and names[3] == "stripes"
    assert names[1] in ("herringbone", "labyrinth") and names[2] in ("herringbone", "labyrinth")
    # the energy gain grows with overstress
    assert np.all(np.diff(res.outputs["energy"][:3]) < 0)
