"""Two-domain radial grids split at ρ: one-sided derivatives, interface rows, quadrature."""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell.numerics.radial_two_domain import build_split_grid


def _kinked(x: np.ndarray, rho: float) -> tuple[np.ndarray, ...]:
    """Odd u = sin(2x) inside ρ, sin(2x) + (x − ρ)⁴/4 outside (C³ at ρ, u⁗ jumps by 6) and its derivatives."""
    out = x > rho
    s = x - rho
    u = np.sin(2 * x) + np.where(out, s**4 / 4, 0.0)
    d = [2 * np.cos(2 * x) + np.where(out, s**3, 0.0), -4 * np.sin(2 * x) + np.where(out, 3 * s**2, 0.0),
         -8 * np.cos(2 * x) + np.where(out, 6 * s, 0.0), 16 * np.sin(2 * x) + np.where(out, 6.0, 0.0)]
    return u, *d


@pytest.mark.parametrize(("m", "rho", "outer"), [(30, 0.5, 18), (40, 0.25, 30), (40, 0.8, 12)])
def test_one_sided_derivatives_of_a_kinked_function(m, rho, outer):
    # common practice, no source: each side's interpolant is exact for its own smooth piece, so the
    # derivatives converge spectrally at every node but ρ although u⁗ jumps there
    g = build_split_grid(m, rho, outer)
    x = g.x
    assert x[0] == 1.0 and x[outer] == rho and np.all(np.diff(x) < 0) and x[-1] > 0
    assert g.split == rho and g.interface == outer
    u, *du = _kinked(x, rho)
    away = np.arange(m) != outer
    for k, (mat, exact, tol) in enumerate(zip((g.d1[-1], g.d2[-1], g.d3[-1], g.d4[-1]), du,
                                              (1e-11, 1e-9, 1e-7, 1e-4), strict=True)):
        np.testing.assert_allclose((mat @ u)[away], exact[away], atol=tol * 10**k)
    # the interface rows: u', u'', u''' continuous (jumps vanish), the mean row between the sides
    assert np.all(np.abs(g.jumps[-1] @ u) < [1e-9, 1e-7, 1e-5])  # round-off grows with the order
    assert (g.d1[-1] @ u)[outer] == pytest.approx(2 * np.cos(2 * rho), abs=1e-10)


def test_jump_rows_see_a_kink_and_quadrature_is_exact():
    # common practice, no source: v = |x| − ρ outside ρ, 0 inside (even parity): v' jumps by 1 at ρ
    rho = 0.4
    g = build_split_grid(24, rho, 14)
    x = g.x
    v = np.where(x > rho, x - rho, 0.0)
    np.testing.assert_allclose(g.jumps[1] @ v, [1.0, 0.0, 0.0], atol=1e-8)
    # ∫₀¹ v dx = (1 − ρ)²/2 and ∫₀¹ v x² dx, both exact for the piecewise interpolant
    assert g.integral[1] @ v == pytest.approx((1 - rho) ** 2 / 2, abs=1e-13)
    moment = (1 - rho**4) / 4 - rho * (1 - rho**3) / 3
    assert g.moment2[1] @ v == pytest.approx(moment, abs=1e-13)
    # the flux weight is ρ over the two sides' Gauss–Lobatto end weights
    w_out, w_in = (1 - rho) / (14 * 15), rho * 2 / (19 * 20)
    assert g.flux_weight == pytest.approx(rho / (w_out + w_in))


def test_bad_split_is_refused():
    with pytest.raises(ValueError, match="split grid"):
        build_split_grid(20, 1.0, 10)
    with pytest.raises(ValueError, match="split grid"):
        build_split_grid(20, 0.5, 17)
