"""The section numerics: exact derivatives, the diagonalised solve, the one-mode closed form, the drawn arc."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.polynomial import legendre

from sweepshell.models.curved_strip.section import make_section_operators, solve_sections, trace_section_shapes


@pytest.mark.parametrize("p", [-1.0, 1.0])
def test_moment_and_tangent_are_the_derivatives_of_the_energy(p):
    ops = make_section_operators(24)
    k = np.array([0.3, 4.0, 40.0, 900.0])
    st = solve_sections(ops, 1000.0, 0.3, p, k)
    eps = 1e-5 * k
    up, down = solve_sections(ops, 1000.0, 0.3, p, k + eps), solve_sections(ops, 1000.0, 0.3, p, k - eps)
    np.testing.assert_allclose((up.energy - down.energy) / (2 * eps), st.moment, rtol=1e-7)
    np.testing.assert_allclose((up.moment - down.moment) / (2 * eps), st.tangent, rtol=1e-5,
                               atol=1e-7 * np.abs(st.moment).max() / k.max())


def test_modal_solve_matches_a_direct_solve_of_the_ritz_system():
    """Rebuild B, S, g from the Legendre functions and solve (B + 12(1−ν²)k²S) a = B a₀ − νpk g directly."""
    modes, c, nu, p = 24, 3000.0, 0.3, -1.0
    ops = make_section_operators(modes)
    x, wq = legendre.leggauss(2 * modes + 8)
    wq = wq / 2
    phi = np.array([legendre.legval(x, np.eye(2 * j + 3)[-1]) for j in range(modes)])
    d2 = np.array([4 * legendre.legval(x, legendre.legder(np.eye(2 * j + 3)[-1], 2)) for j in range(modes)])
    bend, stretch, g = (d2 * wq) @ d2.T, (phi * wq) @ phi.T, d2 @ wq
    a0 = np.zeros(modes)
    a0[0] = c / 12.0
    for k in (4.0, 300.0, 3000.0):
        lam = 12 * (1 - nu**2) * k**2
        a = np.linalg.solve(bend + lam * stretch, bend @ a0 - nu * p * k * g)
        moment = lam / k * a @ stretch @ a + nu * p * g @ (a - a0) + k
        st = solve_sections(ops, c, nu, p, np.array(k))
        assert st.moment == pytest.approx(moment, rel=1e-10)
        coeff = ops.modal_to_coefficients @ st.modal * ops.scale
        # the tiny high-mode coefficients carry ~1e-9 rounding in both solves
        np.testing.assert_allclose(coeff, a, rtol=1e-8, atol=1e-8 * np.abs(a).max())


@pytest.mark.parametrize("p", [-1.0, 1.0])
def test_one_mode_is_the_uniform_curvature_section(p):
    """One mode keeps the section a circular arc of curvature χ: minimising Û over χ in closed form
    (derived in theory.md, common practice, no source) gives χ = (c − νpk)/(1 + βk²), β = (1−ν²)/60,
    and m = ∂Û/∂k = k + 12(1−ν²)kχ²/720 + νp(χ − c)."""
    c, nu = 200.0, 0.3
    k = np.linspace(0.0, 50.0, 11)
    beta = (1 - nu**2) / 60.0
    chi = (c - nu * p * k) / (1 + beta * k**2)
    m = k + 12 * (1 - nu**2) * k * chi**2 / 720.0 + nu * p * (chi - c)
    st = solve_sections(make_section_operators(1), c, nu, p, k)
    np.testing.assert_allclose(st.moment, m, rtol=1e-12, atol=1e-9)


def test_unloaded_section_is_drawn_as_the_circular_arc():
    """ζ₀ = cη²/2 has slope angle s/R_t: the drawn section is y = R sin(s/R), z = R(1 − cos(s/R))."""
    ops = make_section_operators(8)
    w, h, radius = 0.04, 1e-4, 0.05
    c = w**2 / (radius * h)
    shape = trace_section_shapes(ops, c * ops.natural[None, :], 41, np.array([h / w]))[0] * w
    s = np.linspace(-0.5, 0.5, 41) * w
    np.testing.assert_allclose(shape[0], radius * np.sin(s / radius), atol=1e-15)
    np.testing.assert_allclose(shape[1], radius * (1 - np.cos(s / radius)), atol=1e-15)
