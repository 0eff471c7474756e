"""The two-domain grid split at a kink: nodes, exact calculus of piecewise polynomials, spectral convergence."""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell.numerics.radial_chebyshev import build_radial_grid
from sweepshell.numerics.split_chebyshev import build_split_grid, get_split_counts


def _kinked(x: np.ndarray, rho: float, k: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """An odd function analytic on both sides of ρ whose derivative of order k + 1 jumps there, with u', u''."""
    s = np.clip(x - rho, 0.0, None)
    u = np.sin(2 * x) + s ** (k + 1) * np.exp(x)
    du = 2 * np.cos(2 * x) + ((k + 1) * s**k + s ** (k + 1)) * np.exp(x)
    d2 = -4 * np.sin(2 * x) + (k * (k + 1) * s ** max(k - 1, 0) + 2 * (k + 1) * s**k + s ** (k + 1)) * np.exp(x)
    return u, du, d2


@pytest.mark.parametrize(("m", "rho"), [(24, 0.5), (40, 0.2), (40, 0.8)])
def test_split_grid_has_its_edge_first_a_node_on_rho_and_both_sides_filled(m, rho):
    g = build_split_grid(m, rho)
    x = g.x
    p, q = get_split_counts(m, rho)
    assert x.shape == (m,) and x[0] == 1.0 and x[p] == rho and np.all(np.diff(x) < 0) and x[-1] > 0
    assert p + q == m and np.count_nonzero(x > rho) == p
    assert g.centre == rho and set(g.d4) == {1, -1}


@pytest.mark.parametrize("smoothness", [2, 3])
def test_piecewise_polynomials_of_the_space_are_differentiated_and_integrated_exactly(smoothness):
    # common practice, no source: x + (x − ρ)₊^(k+1) lies in the C^k space (odd, degree low on both
    # sides), so every derivative matrix is exact on it, one-sided means at ρ for orders above k
    rho = 0.45
    g = build_split_grid(30, rho, smoothness)
    x = g.x
    s = np.clip(x - rho, 0.0, None)
    k = smoothness
    u = x**3 + s ** (k + 1)
    np.testing.assert_allclose(g.d1[-1] @ u, 3 * x**2 + (k + 1) * s**k, atol=1e-9)
    np.testing.assert_allclose(g.d2[-1] @ u, 6 * x + k * (k + 1) * s ** (k - 1), atol=1e-8)
    jump_mean = np.where(x == rho, 0.5 * np.prod(np.arange(1, k + 2)), 0.0)  # mean of 0 and (k+1)! at ρ
    want3 = 6 + np.where(x > rho, np.prod(np.arange(k - 1, k + 2)) * s ** (k - 2), 0.0) + \
        (jump_mean if k == 2 else 0.0)
    np.testing.assert_allclose(g.d3[-1] @ u, want3, atol=1e-6)
    whole = 0.25 + (1 - rho) ** (k + 2) / (k + 2)
    assert g.integral[-1] @ u == pytest.approx(whole, abs=1e-12)
    v = x**2 + s ** (k + 1)  # even parity
    np.testing.assert_allclose(g.d1[1] @ v, 2 * x + (k + 1) * s**k, atol=1e-9)


def test_kinked_functions_converge_geometrically_on_the_split_grid_and_algebraically_on_one_grid():
    # common practice, no source: a function whose third derivative jumps at ρ (the slope of a
    # cap's deflection at a sharp mismatch edge). Observed: split grid 1.2e-6, 2.3e-8, 1.8e-10 on 10,
    # 12, 14 nodes (a factor 60 per 2 nodes); one Chebyshev grid 5.8e-4, 1.4e-4, 3.6e-5 on 24, 48, 96 (order 2)
    rho = 0.5
    split, single = [], []
    for m in (10, 12, 14):
        g = build_split_grid(m, rho)
        u, du, _ = _kinked(g.x, rho, 2)
        split.append(np.max(np.abs(g.d1[-1] @ u - du)))
    for m in (24, 48, 96):
        g = build_radial_grid(m)
        u, du, _ = _kinked(g.x, rho, 2)
        single.append(np.max(np.abs(g.d1[-1] @ u - du)))
    rate = -np.polyfit([10, 12, 14], np.log(split), 1)[0]  # log error linear in m: geometric
    order = -np.polyfit(np.log([24, 48, 96]), np.log(single), 1)[0]
    assert rate > 1.5 and split[-1] < 1e-9
    assert order < 3.0 and single[-1] > 1e-5


def test_split_grid_rejects_bad_arguments():
    with pytest.raises(ValueError, match="rho"):
        build_split_grid(24, 1.0)
    with pytest.raises(ValueError, match="smoothness"):
        build_split_grid(24, 0.5, 4)
