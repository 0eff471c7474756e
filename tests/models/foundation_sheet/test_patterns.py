"""The pattern classification rule of ``foundation_sheet`` on synthetic height fields.

The fields are made up (common practice, no source); each one is built to be an
unambiguous member of its class, plus borderline cases that show where the thresholds sit.
"""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell.models.foundation_sheet.patterns import (
    PATTERN_NAMES,
    classify_pattern,
    measure_pattern,
    measure_peak_amplitude,
)

N = 64


def _grid() -> tuple[np.ndarray, np.ndarray]:
    x = np.arange(N) / N
    X, Y = np.meshgrid(x, x)
    return X, Y


def _triangle(y: np.ndarray, periods: int) -> np.ndarray:
    return 2.0 * np.abs(2.0 * ((y * periods) % 1.0) - 1.0) - 1.0


def _ring_noise(seed: int, low: float = 7.0, high: float = 9.0) -> np.ndarray:
    F = np.fft.fft2(np.random.default_rng(seed).standard_normal((N, N)))
    m = np.fft.fftfreq(N, 1.0 / N)
    my, mx = np.meshgrid(m, m, indexing="ij")
    kk = np.hypot(mx, my)
    F[(kk < low) | (kk > high)] = 0.0
    return np.fft.ifft2(F).real


def _classify(field: np.ndarray) -> str:
    return PATTERN_NAMES[classify_pattern(measure_pattern(field), 1e-3)]


def _synthetic() -> dict[str, tuple[np.ndarray, str]]:
    X, Y = _grid()
    k = 2 * np.pi * 8
    return {
        "stripes_x": (np.cos(k * X + 0.3), "stripes"),
        "stripes_y": (np.cos(k * Y), "stripes"),
        "stripes_oblique": (np.cos(2 * np.pi * (6 * X + 5 * Y)), "stripes"),
        "stripes_with_harmonic": (np.cos(k * X) + 0.2 * np.cos(2 * k * X), "stripes"),
        "checkerboard": (np.cos(k * X) + np.cos(k * Y), "checkerboard"),
        "checkerboard_rotated": (np.cos(2 * np.pi * (6 * X + 6 * Y)) + np.cos(2 * np.pi * (6 * X - 6 * Y)),
                                 "checkerboard"),
        "checkerboard_rectangular": (np.cos(k * X) + 0.7 * np.cos(k * Y), "checkerboard"),
        "herringbone_zigzag": (np.cos(k * X + 2 * np.pi * _triangle(Y, 2)), "herringbone"),
        "herringbone_undulating": (np.cos(k * X + 1.5 * np.sin(2 * np.pi * 2 * Y)), "herringbone"),
        "herringbone_two_oblique_waves": (np.cos(2 * np.pi * (8 * X + 3 * Y))
                                          + np.cos(2 * np.pi * (8 * X - 3 * Y)), "herringbone"),
        "labyrinth_ring_noise": (_ring_noise(0), "labyrinth"),
        "labyrinth_sharpened": (np.tanh(3 * _ring_noise(1) / _ring_noise(1).std()), "labyrinth"),
        "flat": (1e-6 * np.cos(k * X), "flat"),
        "flat_zero": (np.zeros((N, N)), "flat"),
    }


@pytest.mark.parametrize("case", sorted(_synthetic()))
def test_synthetic_field_gets_its_class(case: str) -> None:
    field, expected = _synthetic()[case]
    assert _classify(field) == expected


@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_labyrinth_noise_of_other_seeds_is_labyrinth(seed: int) -> None:
    assert _classify(_ring_noise(10 + seed)) == "labyrinth"


def test_classification_is_invariant_to_shift_sign_and_scale() -> None:
    for field, expected in _synthetic().values():
        if expected == "flat":
            continue
        moved = -3.0 * np.roll(field, (5, 11), axis=(0, 1))
        assert _classify(moved) == expected


def test_quarter_turn_swaps_stripe_direction() -> None:
    X, _ = _grid()
    stripes = np.cos(2 * np.pi * 8 * X)
    along_x = measure_pattern(stripes).direction
    along_y = measure_pattern(stripes.T).direction
    assert along_x == pytest.approx(0.0, abs=1e-12)
    assert along_y == pytest.approx(np.pi / 2, abs=1e-12)


def test_weak_second_wave_is_still_stripes_and_strong_one_is_checkerboard() -> None:
    X, Y = _grid()
    k = 2 * np.pi * 8
    # share of the weak wave 0.3²/(1 + 0.3²) = 0.08 < 0.2: stripes; 0.9 → crossed waves
    assert _classify(np.cos(k * X) + 0.3 * np.cos(k * Y)) == "stripes"
    assert _classify(np.cos(k * X) + 0.9 * np.cos(k * Y)) == "checkerboard"


def test_measured_wavenumber_and_peak_amplitude() -> None:
    X, Y = _grid()
    field = 0.7 * np.cos(2 * np.pi * 8 * X + np.pi / 8)  # crests half-way between grid points
    m = measure_pattern(field)
    assert m.wavenumber == pytest.approx(8.0, rel=1e-12)
    assert m.rms == pytest.approx(0.7 / np.sqrt(2), rel=1e-12)
    assert measure_peak_amplitude(field) == pytest.approx(0.7, rel=1e-9)
    # the raw grid maximum under-reports it
    assert 0.5 * (field.max() - field.min()) < 0.66
    checker = np.cos(2 * np.pi * (8 * X + 0.1)) + np.cos(2 * np.pi * (8 * Y + 0.2))
    assert measure_peak_amplitude(checker) == pytest.approx(2.0, rel=1e-9)
