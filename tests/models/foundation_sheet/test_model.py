"""``foundation_sheet``: the model seam, statuses, the discrete energy and its minimiser.

Physics checks against published values live in
``tests/models/foundation_sheet/test_reference.py``.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest

from sweepshell.errors import ParameterError
from sweepshell.models import Status, get_model, make_model
from sweepshell.models.base import TRUSTED_STATUSES
from sweepshell.models.foundation_sheet.energy import (
    build_sheet_problem,
    compute_height_field,
    compute_variable_of_height,
    evaluate_sheet_energy,
    project_field_to_modes,
)
from sweepshell.models.foundation_sheet.minimize import minimize_sheet_energy
from sweepshell.models.foundation_sheet.model import FoundationSheetModel, compute_sheet_scales
from tests.conftest import model_inputs

# E_f/E_s = 1000 at equal Poisson ratios: ε_c = ¼(3/1000)^{2/3}
EPS_C = 0.25 * (3.0 / 1000.0) ** (2.0 / 3.0)


#: a 1000:1 film/substrate pair of equal Poisson ratios on a small cell: the base of every case here
SHEET_BASE = {"film_modulus": 1e9, "substrate_modulus": 1e6, "film_poisson_ratio": 0.3,
              "substrate_poisson_ratio": 0.3, "modes": 16, "cell_wavelengths": 2}


def sheet_inputs(model: FoundationSheetModel, **columns: Any) -> dict[str, np.ndarray]:
    """Return solve_batch inputs: defaults, the 1000:1 pair of ``SHEET_BASE``, then ``columns``."""
    return model_inputs(model, **{**SHEET_BASE, **columns})


@pytest.fixture(scope="module")
def model() -> FoundationSheetModel:
    return FoundationSheetModel(seeds=(1, 2), height_samples=8)


def test_registry_returns_the_model() -> None:
    assert get_model("foundation_sheet") is FoundationSheetModel
    built = make_model("foundation_sheet", {"seeds": [4, 5], "height_samples": 0})
    assert built.settings["seeds"] == [4, 5]
    assert "height" not in [o.name for o in built.outputs]
    assert built.extra_dims == {}


def test_settings_are_plain_json_types(model: FoundationSheetModel) -> None:
    import json

    assert json.loads(json.dumps(model.settings)) == model.settings
    assert model.describe()["regimes"] == ["flat", "stripes", "checkerboard", "herringbone", "labyrinth"]


def test_bad_settings_raise_parameter_error() -> None:
    with pytest.raises(ParameterError):
        FoundationSheetModel(seeds=())
    with pytest.raises(ParameterError):
        FoundationSheetModel(height_samples=-1)


def test_check_combination_rejects_unresolved_cells() -> None:
    FoundationSheetModel.check_combination({"modes": 32}, {"cell_wavelengths": np.array([2.0, 8.0])})
    with pytest.raises(ParameterError, match="modes"):
        FoundationSheetModel.check_combination({"modes": 16}, {"cell_wavelengths": np.array([2.0, 8.0])})


def test_batch_shapes_dtypes_statuses_and_nan(model: FoundationSheetModel) -> None:
    strains = [0.5, 1.5, 1.5, 0.0, -1.0, 50.0]
    ratio = [1000, 1000, 1000, 1000, 1000, 1000]
    inputs = sheet_inputs(model, strain_x=[s * EPS_C for s in strains],
                         strain_y=[0.0, 0.0, 0.0, 0.0, 0.0, 0.0],
                         substrate=["half_space", "half_space", "winkler", "half_space", "half_space",
                                    "half_space"],
                         film_modulus=[r * 1e6 for r in ratio])
    res = model.solve_batch(inputs)
    n = len(strains)
    assert res.status.dtype == np.uint8 and res.status.shape == (n,)
    assert res.regime.dtype == np.int8
    for spec in model.outputs:
        arr = res.outputs[spec.name]
        assert arr.dtype == np.float64
        assert arr.shape == (n, *(model.extra_dims[d] for d in spec.dims))
    assert list(res.status) == [Status.no_instability, Status.ok, Status.ok, Status.no_instability,
                                Status.no_instability, Status.outside_validity]
    trusted = np.isin(res.status, [int(s) for s in TRUSTED_STATUSES])
    for spec in model.outputs:
        arr = res.outputs[spec.name].reshape(n, -1)
        assert np.all(np.isnan(arr[~trusted]))
        if not spec.nullable:
            assert np.all(np.isfinite(arr[trusted]))
    assert list(res.regime) == [0, 1, 1, 0, 0, -1]
    assert np.isnan(res.outputs["wavelength"][0]) and np.isfinite(res.outputs["wavelength"][1])
    assert res.outputs["amplitude_rms"][0] == 0.0 and res.outputs["energy"][1] < 0.0


def test_low_contrast_and_unresolved_cells_are_outside_validity(model: FoundationSheetModel) -> None:
    res = model.solve_batch(sheet_inputs(model, film_modulus=[2e6, 1e9], strain_x=[0.03, 2 * EPS_C],
                                        modes=[16, 16], cell_wavelengths=[2, 8]))
    assert list(res.status) == [Status.outside_validity] * 2 and list(res.regime) == [-1, -1]


def test_deterministic_and_batch_invariant(model: FoundationSheetModel) -> None:
    sx = [1.6 * EPS_C, 1.2 * EPS_C, 1.1 * EPS_C]
    sy = [0.2 * EPS_C, 1.2 * EPS_C, 0.0]
    together = model.solve_batch(sheet_inputs(model, strain_x=sx, strain_y=sy))
    again = model.solve_batch(sheet_inputs(model, strain_x=sx, strain_y=sy))
    alone = model.solve_batch(sheet_inputs(model, strain_x=sx[1:2], strain_y=sy[1:2]))
    for name, arr in together.outputs.items():
        np.testing.assert_array_equal(arr, again.outputs[name])
        np.testing.assert_array_equal(arr[1], alone.outputs[name][0])
    assert together.regime[1] == alone.regime[0]


def test_iteration_cap_gives_not_converged_with_nan() -> None:
    capped = FoundationSheetModel(seeds=(1,), max_iterations=2, height_samples=4)
    res = capped.solve_batch(sheet_inputs(capped, strain_x=[2.0 * EPS_C]))
    assert res.status[0] == Status.not_converged and res.regime[0] == -1
    assert all(np.all(np.isnan(v)) for v in res.outputs.values())


def test_height_output_samples_the_equilibrium(model: FoundationSheetModel) -> None:
    res = model.solve_batch(sheet_inputs(model, strain_x=[2.0 * EPS_C]))
    height = res.outputs["height"][0]
    # uniaxial stripes along x: every row is the same profile, rms matches the fine field
    np.testing.assert_allclose(height, np.broadcast_to(height[0], height.shape), atol=1e-3 * np.abs(height).max())
    assert np.sqrt(np.mean(height**2)) == pytest.approx(res.outputs["amplitude_rms"][0], rel=1e-4)
    assert model.extra_coords()["height_x"][1] == pytest.approx(1.0 / 8.0)


def test_scales_match_closed_forms_for_both_substrates() -> None:
    sc = compute_sheet_scales(np.array([1e-6, 1e-6]), np.array([1e9, 1e9]), np.array([0.0, 0.0]),
                              np.array([1e6, 1e6]), np.array([0.0, 0.0]),
                              np.array(["half_space", "winkler"]))
    D, K = 1e9 * 1e-18 / 12.0, 1e6 * (3e-3) ** (1 / 3) / 1e-6 / 2.0
    # Winkler bed: critical force 2√(DK) and wavelength 2π(D/K)^{1/4} (Hetényi 1946)
    assert sc["critical_strain"][1] * 1e9 * 1e-6 == pytest.approx(2 * np.sqrt(D * K), rel=1e-12)
    assert sc["critical_wavelength"][1] == pytest.approx(2 * np.pi * (D / K) ** 0.25, rel=1e-12)
    assert sc["critical_strain"][0] == pytest.approx(EPS_C, rel=1e-12)


@pytest.mark.parametrize("substrate", ["half_space", "winkler"])
def test_energy_gradient_matches_finite_differences(substrate: str) -> None:
    problem = build_sheet_problem(16, 2, substrate, 0.3, (1.5, 0.7))
    rng = np.random.default_rng(3)
    z = 0.5 * rng.standard_normal(problem.size)
    d = rng.standard_normal(problem.size)
    _, grad = evaluate_sheet_energy(problem, z)
    step = 1e-5
    fd = (evaluate_sheet_energy(problem, z + step * d)[0]
          - evaluate_sheet_energy(problem, z - step * d)[0]) / (2 * step)
    assert grad @ d == pytest.approx(fd, rel=1e-6)


def test_energy_decreases_monotonically_in_the_minimiser() -> None:
    problem = build_sheet_problem(24, 3, "half_space", 0.3, (1.2, 1.2))
    z0 = 0.05 * np.random.default_rng(1).standard_normal(problem.size)
    found = minimize_sheet_energy(problem, z0, gradient_tolerance=1e-6, record=True)
    history = np.array(found.history)
    assert found.converged and len(history) > 10
    assert np.all(np.diff(history) <= 1e-12 * np.abs(history[:-1]).max())
    assert history[-1] == pytest.approx(found.energy, rel=1e-9)
    assert found.energy < -0.1  # equibiaxial overstress 1.56: clearly wrinkled


def test_flat_start_stays_flat_and_zero_energy() -> None:
    problem = build_sheet_problem(16, 2, "half_space", 0.3, (2.0, 0.0))
    f, grad = evaluate_sheet_energy(problem, np.zeros(problem.size))
    assert f == 0.0 and np.all(grad == 0.0)
    assert problem.linear_stability_margin() < 0.0
    assert build_sheet_problem(16, 2, "half_space", 0.3, (0.99, 0.0)).linear_stability_margin() > 0.0
    z = np.random.default_rng(0).standard_normal(problem.size)
    assert compute_height_field(problem, z).mean() == pytest.approx(0.0, abs=1e-12)
    # unit metric: the variable of a grid field has the field's band-limited sum of squares
    noise = np.random.default_rng(1).standard_normal((16, 16))
    band = np.fft.irfft2(np.where(problem.band, np.fft.rfft2(noise), 0.0), s=(16, 16))
    assert np.sum(project_field_to_modes(problem, noise) ** 2) == pytest.approx(np.sum(band**2), rel=1e-12)


def test_swapping_strains_turns_the_stripes(model: FoundationSheetModel) -> None:
    # uniaxial-dominated loading: stripes whose wavevector follows the larger compression
    sx, sy = [1.8 * EPS_C, 0.2 * EPS_C], [0.2 * EPS_C, 1.8 * EPS_C]
    res = model.solve_batch(sheet_inputs(model, strain_x=sx, strain_y=sy))
    assert list(res.regime) == [1, 1]
    h0, h1 = res.outputs["height"]
    # stripes normal to x: the height varies along x only, and the swap transposes it
    assert np.ptp(h0, axis=0).max() < 1e-3 * np.abs(h0).max()
    assert np.ptp(h1, axis=1).max() < 1e-3 * np.abs(h1).max()
    for name in ("amplitude_rms", "amplitude_peak", "energy", "wavelength"):
        assert res.outputs[name][0] == pytest.approx(res.outputs[name][1], rel=1e-4)


@pytest.mark.parametrize("substrate", ["half_space", "winkler"])
def test_airy_reduction_agrees_with_displacement_form(substrate: str) -> None:
    # the in-plane displacements eliminated exactly (Airy) vs kept as unknowns (reference
    # solver): same equilibrium of an equibiaxial checkerboard with its harmonics
    from sweepshell.models.foundation_sheet.reference import minimize_reference_energy

    n, s = 12, 2.0 / 1.3
    problem = build_sheet_problem(n, 1, substrate, 0.3, (s, s))
    x = np.arange(n) / n * 2 * np.pi
    X, Y = np.meshgrid(x, x)
    start = 0.5 * (np.cos(X) + np.cos(Y))
    fast = minimize_sheet_energy(problem, compute_variable_of_height(problem, start), gradient_tolerance=1e-8)
    reference = minimize_reference_energy(n, 1, substrate, 0.3, (s, s), start, gradient_tolerance=1e-8)
    assert fast.converged and reference.converged
    assert fast.energy == pytest.approx(reference.energy, rel=1e-7)
    np.testing.assert_allclose(fast.height, reference.height, atol=1e-4 * np.abs(fast.height).max())
    harmonic = np.abs(np.fft.fft2(fast.height))[1, 2] / np.abs(np.fft.fft2(fast.height))[0, 1]
    assert harmonic > 0.01  # a genuinely nonlinear state, not a single mode


def test_numerical_trouble_is_status_failed_not_an_exception(monkeypatch: pytest.MonkeyPatch) -> None:
    import sweepshell.models.foundation_sheet.point as module

    def explode(*args: Any, **kwargs: Any) -> None:
        raise FloatingPointError("overflow encountered")

    monkeypatch.setattr(module, "minimize_sheet_energy", explode)
    model = FoundationSheetModel(seeds=(1,), height_samples=4)
    res = model.solve_batch(sheet_inputs(model, strain_x=[2.0 * EPS_C, 0.5 * EPS_C]))
    assert list(res.status) == [Status.failed, Status.no_instability]
    assert res.regime[0] == -1 and res.regime[1] == 0
    assert all(np.all(np.isnan(v[0])) for v in res.outputs.values())


def test_huge_start_backtracks_instead_of_failing() -> None:
    problem = build_sheet_problem(16, 2, "half_space", 0.3, (1.5, 0.0))
    z0 = 1e3 * np.random.default_rng(2).standard_normal(problem.size)
    with np.errstate(all="raise", under="ignore"):
        found = minimize_sheet_energy(problem, z0, gradient_tolerance=1e-6)
    assert found.converged and found.energy == pytest.approx(-0.125, rel=1e-6)


def test_mirrored_starts_make_swapped_strains_mirror_images() -> None:
    # an isotropic film on a square cell: (ε₁, ε₂) and (ε₂, ε₁) must give mirror-image equilibria
    # (common practice, no source: the symmetry of the problem)
    model = FoundationSheetModel(seeds=(1, 2), height_samples=8)
    inputs = FoundationSheetModel.sample_inputs()
    base = {k: np.repeat(v[1:2], 6) for k, v in inputs.items()}
    scales = compute_sheet_scales(base["film_thickness"][:1], base["film_modulus"][:1],
                                  base["film_poisson_ratio"][:1], base["substrate_modulus"][:1],
                                  base["substrate_poisson_ratio"][:1], base["substrate"][:1])
    eps_c = float(scales["critical_strain"][0])
    pairs = np.array([(2.2, 0.4), (1.8, 1.3), (2.6, 2.0)]) * eps_c
    base["strain_x"] = np.concatenate([pairs[:, 0], pairs[:, 1]])
    base["strain_y"] = np.concatenate([pairs[:, 1], pairs[:, 0]])
    result = model.solve_batch(base)
    assert np.all(result.status == Status.ok)
    np.testing.assert_array_equal(result.regime[:3], result.regime[3:])
    np.testing.assert_allclose(result.outputs["energy"][:3], result.outputs["energy"][3:], rtol=1e-12)
    height = result.outputs["height"]
    np.testing.assert_allclose(height[:3], np.swapaxes(height[3:], 1, 2), atol=1e-12 * np.abs(height).max())
    confidence = result.outputs["pattern_confidence"]
    assert np.all((confidence > 0) & (confidence <= 1)) and np.all(confidence[:3] == confidence[3:])


def test_energy_transforms_match_scipy_fft_and_fall_back(monkeypatch: pytest.MonkeyPatch) -> None:
    # the energy's direct transforms give scipy.fft's bits; without the binding, the public functions
    import sys

    import scipy.fft

    from sweepshell.models.foundation_sheet import energy

    stack = np.random.default_rng(4).standard_normal((3, 16, 16))
    spectrum = scipy.fft.rfft2(stack, axes=(-2, -1))
    np.testing.assert_array_equal(energy._rfft2(stack), spectrum)
    np.testing.assert_array_equal(energy._irfft2(spectrum, 16), scipy.fft.irfft2(spectrum, s=(16, 16)))
    import scipy.fft._pocketfft as binding_package

    monkeypatch.setitem(sys.modules, "scipy.fft._pocketfft.pypocketfft", None)
    monkeypatch.delattr(binding_package, "pypocketfft")
    assert energy._choose_transforms() == (energy._rfft2_public, energy._irfft2_public)
