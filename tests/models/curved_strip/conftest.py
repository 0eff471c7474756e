"""Helpers for the curved_strip tests: inputs in physical units from the non-dimensional numbers."""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell.models.curved_strip import CurvedStripModel


def make_inputs(n: int = 1, **values) -> dict[str, np.ndarray]:
    """Return model inputs of ``n`` points at the defaults, with ``values`` (scalars or arrays) set."""
    out = {}
    for p in CurvedStripModel.parameters:
        v = values.get(p.name, p.default)
        out[p.name] = np.array(np.broadcast_to(np.asarray(v), (n,)))
    return out


def plate_modulus(inputs: dict[str, np.ndarray]) -> np.ndarray:
    """D = E h³/(12(1 − ν²)) of each point."""
    nu = inputs["poisson_ratio"]
    return inputs["youngs_modulus"] * inputs["thickness"] ** 3 / (12.0 * (1.0 - nu**2))


def thickness_for(c: float | np.ndarray, width: float = 0.04, radius: float = 0.04) -> np.ndarray:
    """Thickness giving the curvature parameter c = w²/(R_t h)."""
    return np.asarray(width**2 / (radius * np.asarray(c, dtype=float)))


def radius_for(c: float | np.ndarray, width: float = 0.04, thickness: float = 1e-4) -> np.ndarray:
    """Transverse radius giving the curvature parameter c = w²/(R_t h)."""
    return np.asarray(width**2 / (thickness * np.asarray(c, dtype=float)))


@pytest.fixture(scope="module")
def model() -> CurvedStripModel:
    return CurvedStripModel()
