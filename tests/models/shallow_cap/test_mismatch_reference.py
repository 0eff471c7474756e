"""Closed-form checks of the ``shallow_cap`` mismatch-strain load in its flat-plate limit.

The mismatch strain e is ε*/ε_cl with ε_cl = 2h/(R c), c = √(3(1−ν²)); λ is the shell
parameter [12(1−ν²)]^{1/4} a/√(Rh). A cap with λ → 0 is a flat circular plate, where the
in-plane and the buckling problems have closed forms. The stress-function slope F of the model
gives N_r/(E h ε*) = −F/(4 e x) and N_θ/(E h ε*) = −F'/(4 e).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import optimize, special

from sweepshell.models.shallow_cap.modes import compute_mode_determinants
from sweepshell.models.shallow_cap.problem import build_problem
from sweepshell.numerics.arclength import compute_tangent

NU = 0.3


def make_mismatch_problem(lam, *, clamped=True, immovable=True, radius=1.0, annulus=False, width=0.1, nodes=34):
    one = np.ones(1, dtype=bool)
    return build_problem(np.array([lam]), np.array([NU]), clamped * one, immovable * one, ~one, np.zeros(1),
                        np.full(1, 2.0), nodes, mismatch=one, mismatch_strain=np.ones(1),
                        mismatch_radius=np.array([radius]), annulus=annulus * one, step_width=width)


def linear_state(pb):
    """Return the linear response per unit load parameter (initial tangent scaled to dμ = 1)."""
    m = pb.unknowns
    w = np.full(m + 1, 1.0 / m)
    w[-1] = 1.0
    e = np.zeros((1, m + 1))
    e[:, -1] = 1.0
    _, lin = pb.linearize(np.zeros((1, m + 1)), np.arange(1))
    t = compute_tangent(lin, e, w)
    return t / t[:, -1:]


def linear_membrane_stress(pb):
    """Return N_r, N_θ over E h ε* at the nodes of the linear response (:func:`linear_state`)."""
    t = linear_state(pb)
    f, df_eigen = pb.total_stress(t, np.arange(1))
    m = pb.size
    df = t[:, m:2 * m] @ pb.grid.d1[-1].T + df_eigen
    e = pb.force_scale[0]
    return -f[0] / (4 * e * pb.grid.x), -df[0] / (4 * e)


def disc_inclusion_stress(x, rho, immovable):
    """N_r, N_θ over E h ε* of a flat plate of radius 1 with a strained disc x < ρ (plane stress).

    Re-derived Lamé problem (Timoshenko & Goodier 1951, thermal stresses in a thin disc): u = A r
    inside, B r + C/r outside, u and σ_r continuous at ρ; C = (1+ν)ε*ρ²/2 in both cases.
    Immovable edge (u = 0): inside −[(1−ν) + (1+ν)ρ²]/(2(1−ν)) (equibiaxial); outside
    −ρ²[(1+ν) ± (1−ν)/x²]/(2(1−ν)) (+ radial, − hoop). Free edge (σ_r = 0): inside −(1−ρ²)/2;
    outside σ_r = −ρ²(1/x² − 1)/2, σ_θ = +ρ²(1/x² + 1)/2.
    """
    inside = x < rho
    if immovable:
        n_in = -((1 - NU) + (1 + NU) * rho**2) / (2 * (1 - NU))
        n_r = -(rho**2) * ((1 + NU) + (1 - NU) / x**2) / (2 * (1 - NU))
        n_t = -(rho**2) * ((1 + NU) - (1 - NU) / x**2) / (2 * (1 - NU))
    else:
        n_in = -(1 - rho**2) / 2
        n_r = -(rho**2) * (1 / x**2 - 1) / 2
        n_t = rho**2 * (1 / x**2 + 1) / 2
    return np.where(inside, n_in, n_r), np.where(inside, n_in, n_t)


@pytest.mark.parametrize("immovable", [True, False])
@pytest.mark.parametrize("annulus", [False, True])
def test_linear_inplane_response_of_flat_plate_is_the_lame_inclusion(immovable, annulus):
    # Lamé disc inclusion, re-derived (Timoshenko & Goodier 1951); annulus = whole plate minus disc
    # (uniform ε* with an immovable edge: N = −E h ε*/(1−ν); with a free edge: no stress). A
    # nearly sharp edge (w = 1e-4; the smoothing moves the stresses by O(w²)) at λ = 0.01 (the
    # curvature coupling is O(λ⁴)), compared away from the smoothed edge
    rho = 0.6
    pb = make_mismatch_problem(0.01, immovable=immovable, radius=rho, annulus=annulus, width=1e-4)
    x = pb.grid.x
    n_r, n_t = linear_membrane_stress(pb)
    want_r, want_t = disc_inclusion_stress(x, rho, immovable)
    if annulus:
        whole = -1.0 / (1 - NU) if immovable else 0.0
        want_r, want_t = whole - want_r, whole - want_t
    away = np.abs(x - rho) > 0.01
    np.testing.assert_allclose(n_r[away], want_r[away], atol=1e-7)
    np.testing.assert_allclose(n_t[away], want_t[away], atol=1e-7)
    # the plane-stress disc inclusion in a free plate: inside −E h ε*(1−ρ²)/2 (the infinite sheet's
    # −E h ε*/2 as ρ → 0)
    if not immovable and not annulus:
        assert n_r[-1] == pytest.approx(-(1 - rho**2) / 2, abs=1e-7)


def flat_plate_critical(lam, *, clamped, mode):
    """Return e λ² where the flat prebuckled state of a full swelling plate loses stability."""
    pb = make_mismatch_problem(lam, clamped=clamped)
    t = linear_state(pb)
    t[:, :pb.size] = 0.0  # the flat state: in-plane stress only

    def sign_of(mu):
        if mode == 0:
            return np.linalg.slogdet(pb.evaluate(mu * t, np.arange(1))[1][0, :, :-1])[0]
        return compute_mode_determinants(pb, mu * t, np.arange(1), np.array([mode]))[0][0, 0]

    mus = np.linspace(0.0, 3.0, 61)
    signs = np.array([sign_of(mu) for mu in mus])
    j = int(np.argmax(signs != signs[0]))
    assert j > 0
    mu = optimize.brentq(lambda m: sign_of(m) * signs[0], mus[j - 1], mus[j], xtol=1e-13)
    return mu * pb.force_scale[0] * lam**2


@pytest.mark.parametrize(("clamped", "mode", "root"), [
    (True, 0, special.jn_zeros(1, 1)[0]),  # clamped, axisymmetric: J₁(k) = 0, k² = 14.682
    (True, 1, special.jn_zeros(2, 1)[0]),  # clamped, cos θ: J₂(k) = 0, k² = 26.375
    (False, 0, optimize.brentq(lambda k: k * special.j0(k) - (1 - NU) * special.j1(k), 1.0, 3.0)),  # pinned 4.198
])
def test_swelling_flat_plate_buckles_at_the_circular_plate_load(clamped, mode, root):
    # Timoshenko & Gere 1961 (circular plate under uniform radial compression): N_cr = k² D/a², k the
    # root named above (14.68 clamped, 4.20 pinned at ν = 0.3; roots recomputed with scipy). A whole
    # swelling plate with an immovable edge carries N = −E h ε*/(1−ν), so e_cr λ² = k²(1−ν)/4. The
    # model's operators at the flat prebuckled state (λ = 0.1) must lose definiteness there; the
    # curvature shifts it by O(λ⁴): tolerance 1e-4 relative
    got = flat_plate_critical(0.1, clamped=clamped, mode=mode)
    assert got == pytest.approx(root**2 * (1 - NU) / 4, rel=1e-4)
