"""Radial Chebyshev grids, plain and stretched towards the axis."""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell.numerics.radial_chebyshev import make_radial_grid


@pytest.mark.parametrize("stretch", [0.0, 0.5, 0.85])
def test_derivatives_and_weights_of_smooth_functions(stretch):
    # odd u = sin(3x) x and even v = cos(2x): derivatives, ∫₀¹ u dx and ∫₀¹ v x² dx in closed form
    g = make_radial_grid(40, stretch)
    x = g.x
    u = np.sin(3 * x) * x**2  # odd
    du = 3 * np.cos(3 * x) * x**2 + 2 * x * np.sin(3 * x)
    d2u = -9 * np.sin(3 * x) * x**2 + 12 * x * np.cos(3 * x) + 2 * np.sin(3 * x)
    d3u = -27 * np.cos(3 * x) * x**2 - 54 * x * np.sin(3 * x) + 18 * np.cos(3 * x)
    np.testing.assert_allclose(g.d1[-1] @ u, du, atol=1e-9)
    np.testing.assert_allclose(g.d2[-1] @ u, d2u, atol=1e-8)
    np.testing.assert_allclose(g.d3[-1] @ u, d3u, atol=1e-6)
    v = np.cos(2 * x)
    np.testing.assert_allclose(g.d1[1] @ v, -2 * np.sin(2 * x), atol=1e-10)
    # by parts: ∫₀¹ x² sin(3x) dx = (−7 cos 3 + 6 sin 3 − 2)/27, ∫₀¹ x² cos(2x) dx = (sin 2 + 2 cos 2)/4
    int_u = (-7 * np.cos(3.0) + 6 * np.sin(3.0) - 2) / 27.0
    int_v = (np.sin(2.0) + 2 * np.cos(2.0)) / 4.0
    assert g.integral[-1] @ u == pytest.approx(int_u, abs=1e-12)
    assert g.moment2[1] @ v == pytest.approx(int_v, abs=1e-12)


def test_stretch_moves_nodes_towards_the_axis():
    plain, stretched = make_radial_grid(24), make_radial_grid(24, 0.5)
    assert plain.stretch == 0.0 and stretched.stretch == 0.5
    assert stretched.x[0] == 1.0 and np.all(np.diff(stretched.x) < 0) and stretched.x[-1] > 0
    # spacing at the axis shrinks by 1 − β, at the edge grows by 1 + 2β
    assert stretched.x[-1] / plain.x[-1] == pytest.approx(0.5, rel=1e-2)
    assert (1 - stretched.x[1]) / (1 - plain.x[1]) == pytest.approx(2.0, rel=1e-2)
    with pytest.raises(ValueError, match="stretch"):
        make_radial_grid(24, 1.0)
