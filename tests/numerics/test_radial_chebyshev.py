"""Radial Chebyshev grids, plain and stretched towards the axis."""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell.numerics.radial_chebyshev import build_radial_grid, get_cluster_width, to_chebyshev_coordinate


@pytest.mark.parametrize("stretch", [0.0, 0.5, 0.85])
def test_derivatives_and_weights_of_smooth_functions(stretch):
    # odd u = sin(3x) x and even v = cos(2x): derivatives, ∫₀¹ u dx and ∫₀¹ v x² dx in closed form
    g = build_radial_grid(40, stretch)
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
    plain, stretched = build_radial_grid(24), build_radial_grid(24, 0.5)
    assert plain.stretch == 0.0 and stretched.stretch == 0.5
    assert stretched.x[0] == 1.0 and np.all(np.diff(stretched.x) < 0) and stretched.x[-1] > 0
    # spacing at the axis shrinks by 1 − β, at the edge grows by 1 + 2β
    assert stretched.x[-1] / plain.x[-1] == pytest.approx(0.5, rel=1e-2)
    assert (1 - stretched.x[1]) / (1 - plain.x[1]) == pytest.approx(2.0, rel=1e-2)
    with pytest.raises(ValueError, match="stretch"):
        build_radial_grid(24, 1.0)


@pytest.mark.parametrize(("m", "centre"), [(48, 0.5), (34, 0.3), (64, 0.9), (48, 0.05)])
def test_clustered_grid_has_a_node_on_the_centre_and_exact_calculus_of_smooth_functions(m, centre):
    # common practice, no source: the clustered map is smooth, so smooth functions keep (mapped)
    # spectral accuracy, less than on plain nodes because the clusters take a share of them
    g = build_radial_grid(m, 0.0, centre)
    x = g.x
    assert g.centre == centre and np.count_nonzero(x == centre) == 1
    assert x[0] == 1.0 and np.all(np.diff(x) < 0) and x[-1] > 0
    u = np.sin(3 * x) * x**2  # odd
    du = 3 * np.cos(3 * x) * x**2 + 2 * x * np.sin(3 * x)
    d2u = -9 * np.sin(3 * x) * x**2 + 12 * x * np.cos(3 * x) + 2 * np.sin(3 * x)
    # observed worst (34 nodes, ρ = 0.3): 3e-7, 2e-4 and 1.4e-6
    np.testing.assert_allclose(g.d1[-1] @ u, du, atol=1e-5)
    np.testing.assert_allclose(g.d2[-1] @ u, d2u, atol=1e-3)
    np.testing.assert_allclose(g.d1[1] @ np.cos(2 * x), -2 * np.sin(2 * x), atol=1e-5)
    int_u = (-7 * np.cos(3.0) + 6 * np.sin(3.0) - 2) / 27.0  # by parts, as above
    assert g.integral[-1] @ u == pytest.approx(int_u, abs=1e-10)
    # the map is the identity's inverse at the nodes: ξ of the nodes are the Chebyshev points
    xi = np.cos(np.pi * np.arange(m) / (2 * m - 1))
    np.testing.assert_allclose(to_chebyshev_coordinate(x, m, 0.0, centre), xi, atol=1e-13)


def test_clustered_grid_refines_around_the_centre_as_the_square_of_the_node_count():
    # the cluster width ε = min(0.04, 0.01 (48/M)²): the spacing next to ρ shrinks faster than
    # 1/M² (plain nodes: 1/M), 2.4 (24 nodes) to 6 times (48) finer than plain nodes there
    spacing = []
    for m in (24, 48, 96):
        x = build_radial_grid(m, 0.0, 0.5).x
        k = int(np.nonzero(x == 0.5)[0][0])
        spacing.append(min(x[k - 1] - x[k], x[k] - x[k + 1]))
        plain = build_radial_grid(m).x
        assert spacing[-1] < 0.5 * np.min(np.diff(plain[(plain > 0.4) & (plain < 0.6)][::-1]))
    order = -np.polyfit(np.log([24, 48, 96]), np.log(spacing), 1)[0]
    assert order > 2.0
    assert get_cluster_width(96) == pytest.approx(0.0025)
    with pytest.raises(ValueError, match="centre"):
        build_radial_grid(24, 0.5, 0.5)
    with pytest.raises(ValueError, match="centre"):
        build_radial_grid(24, 0.0, 1.0)


def test_chebyshev_coordinate_inverts_every_map():
    # common practice, no source: round trip x → ξ for the plain, the cubic and the clustered map
    for stretch, centre in ((0.0, 0.0), (0.5, 0.0), (0.0, 0.4)):
        g = build_radial_grid(30, stretch, centre)
        xi = np.cos(np.pi * np.arange(30) / 59)
        np.testing.assert_allclose(to_chebyshev_coordinate(g.x, 30, stretch, centre), xi, atol=1e-13)
