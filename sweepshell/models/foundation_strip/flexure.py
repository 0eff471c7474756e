"""Closed-form flexure of an elastic plate on a fluid (Winkler) foundation, physical units.

Governing equation (x ≥ 0 the distance from the loaded end or line, w the deflection,
positive downwards into the foundation):

    D w'''' + N w'' + K w = 0,    D = E T_e³ / (12 (1 − ν²)),    K = Δρ g,

with N the horizontal (axial) force per unit length along strike, compressive positive.
Non-dimensionalised by the flexural parameter α = (4D/K)^{1/4} (Turcotte & Schubert,
*Geodynamics*, Sec. 3.17) and n = N/(2√(DK)), ξ = x/α:

    ¼ w'''' + n w'' + w = 0,    decaying root r² = 2(−n + i√(1 − n²)),

so for |n| < 1 every decaying solution is w = Re(C e^{rξ}) = |C| e^{−aξ} cos(bξ + θ).
Boundary conditions at x = 0, with V₀ the line load (N/m) and M₀ the end moment (N·m/m):

* ``broken`` plate (free end of a semi-infinite plate carrying the whole load):
  D w''(0) = M₀ and D w'''(0) + N w'(0) = V₀;
* ``continuous`` plate (an unbroken infinite plate with the line load and a couple on the
  line x = 0; the side x ≥ 0 is reported): the symmetric part has w'(0) = 0 and
  D w'''(0⁺) = V₀/2, the antisymmetric part w(0) = 0 and D w''(0⁺) = −M₀/2.

A positive end moment deflects the reported side downwards, like a positive load.
For N = 0 these are Hetényi's (1946) semi-infinite beam with end force and moment (with
his moment sign reversed) and infinite beam with a concentrated force and couple; the
broken plate gives w = (V₀α³/2D) e^{−x/α} cos(x/α) and the continuous plate
w = (V₀α³/8D) e^{−x/α}(cos + sin)(x/α) (Turcotte & Schubert write V₀α³/4D for the broken
plate because there each of the two broken ends carries half of V₀).

Validity: small slopes, linear elastic plate, |N| < 2√(DK) (a compressive force beyond
that buckles the plate; a tension beyond it is not modelled): otherwise
``outside_validity``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["FlexureProfile", "compute_flexure"]


@dataclass(frozen=True)
class FlexureProfile:
    """Flexure outputs for n points (arrays of shape ``(n,)``, SI units).

    Attributes
    ----------
    flexural_parameter
        α = (4D/K)^{1/4}, m.
    zero_crossing_distance
        Distance from x = 0 to the first zero of w, m (NaN without load).
    forebulge_distance
        Distance to the crest of the forebulge (first extremum past the zero crossing), m.
    forebulge_height
        Height of the forebulge crest above the undeflected level, m (positive upwards).
    max_deflection
        Deflection of largest magnitude, m (positive downwards).
    valid
        Whether |N| < 2√(DK); the other arrays are NaN where this is False.
    """

    flexural_parameter: np.ndarray
    zero_crossing_distance: np.ndarray
    forebulge_distance: np.ndarray
    forebulge_height: np.ndarray
    max_deflection: np.ndarray
    valid: np.ndarray


def _solve_coefficient(rows: list[tuple[np.ndarray, np.ndarray]], rhs: list[np.ndarray]) -> np.ndarray:
    """Return complex C = p + iq solving two real conditions ``Re(C·zₖ) = rhsₖ`` (Cramer)."""
    (a1, b1), (a2, b2) = rows
    det = a1 * b2 - a2 * b1
    p = (rhs[0] * b2 - rhs[1] * b1) / det
    q = (a1 * rhs[1] - a2 * rhs[0]) / det
    return p + 1j * q


def _row(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Coefficients of (p, q) in Re((p + iq) z) = p Re z − q Im z."""
    return z.real, -z.imag


def _decaying_solution(D: np.ndarray, alpha: np.ndarray, n_ax: np.ndarray, end_load: np.ndarray,
                       end_moment: np.ndarray, axial_force: np.ndarray,
                       continuous: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Return the decaying root ``r`` and the coefficient ``C`` of ``w = Re(C e^{rξ})`` (see module docstring).

    ``n_ax`` is N/(2√(DK)) inside (−1, 1); the end conditions are those of the broken or the
    continuous plate.
    """
    # the decaying root with positive frequency: r = −a + ib, a, b > 0
    r = np.conj(-np.sqrt(2.0 * (-n_ax + 1j * np.sqrt(1.0 - n_ax ** 2))))
    bend = D / alpha ** 2  # converts d²w/dξ² to a moment
    shear = D / alpha ** 3  # converts d³w/dξ³ to a force
    ax = axial_force / alpha
    one = np.ones_like(r)
    # broken: shear row D w''' + N w' = V0, moment row D w'' = M0
    shear_row = _row(shear * r ** 3 + ax * r)
    c_broken = _solve_coefficient([_row(bend * r ** 2), shear_row], [end_moment, end_load])
    # continuous: symmetric part (w' = 0, D w''' = V0/2) + antisymmetric (w = 0, D w'' = −M0/2)
    c_sym = _solve_coefficient([_row(r), _row(shear * r ** 3)], [0.0 * end_load, 0.5 * end_load])
    c_anti = _solve_coefficient([_row(one), _row(bend * r ** 2)], [0.0 * end_moment, -0.5 * end_moment])
    return r, np.where(continuous, c_sym + c_anti, c_broken)


def compute_flexure(elastic_thickness: np.ndarray, youngs_modulus: np.ndarray, poisson_ratio: np.ndarray,
                    density_contrast: np.ndarray, gravity: np.ndarray, end_load: np.ndarray,
                    end_moment: np.ndarray, axial_force: np.ndarray, continuous: np.ndarray) -> FlexureProfile:
    """Return the closed-form flexure outputs of n plates (vectorised).

    Parameters
    ----------
    elastic_thickness
        T_e, m.
    youngs_modulus
        E, Pa.
    poisson_ratio
        ν, dimensionless.
    density_contrast
        Δρ between foundation and infill, kg/m³.
    gravity
        g, m/s².
    end_load
        V₀, line load at x = 0, N/m (positive downwards).
    end_moment
        M₀, moment at x = 0, N·m/m (positive deflects the side x ≥ 0 downwards).
    axial_force
        N, horizontal force per unit length, N/m (compressive positive).
    continuous
        Boolean per point: continuous plate (True) or broken plate (False).

    Returns
    -------
    FlexureProfile
        The outputs, NaN where the axial force is out of range.
    """
    D = youngs_modulus * elastic_thickness ** 3 / (12.0 * (1.0 - poisson_ratio ** 2))
    K = density_contrast * gravity
    alpha = (4.0 * D / K) ** 0.25
    n_ax = axial_force / (2.0 * np.sqrt(D * K))
    valid = np.abs(n_ax) < 1.0
    r, C = _decaying_solution(D, alpha, np.where(valid, n_ax, 0.0), end_load, end_moment, axial_force, continuous)

    a, b = -r.real, r.imag
    mag, theta = np.abs(C), np.angle(C)
    loaded = mag > 0.0
    eps = 1e-12
    # zeros of cos(bξ + θ): bξ + θ = π/2 + kπ, first ξ > 0
    k0 = np.ceil((b * eps + theta - 0.5 * np.pi) / np.pi)
    xi_zero = (0.5 * np.pi + k0 * np.pi - theta) / b
    # extrema of w: w' ∝ cos(bξ + θ + arg r)
    phase = theta + np.angle(r)
    k1 = np.ceil((b * eps + phase - 0.5 * np.pi) / np.pi)
    xi_ext1 = (0.5 * np.pi + k1 * np.pi - phase) / b
    # first extremum strictly beyond the zero crossing
    k2 = np.ceil((b * xi_zero * (1.0 + eps) + phase - 0.5 * np.pi) / np.pi)
    xi_bulge = (0.5 * np.pi + k2 * np.pi - phase) / b

    def deflection(xi: np.ndarray) -> np.ndarray:
        return mag * np.exp(-a * xi) * np.cos(b * xi + theta)

    w0 = deflection(np.zeros_like(a))
    w1 = deflection(xi_ext1)
    # later extrema decay with the envelope, so the largest is at the end or the first extremum
    w_max = np.where(np.abs(w1) > np.abs(w0), w1, w0)
    nan = np.full_like(a, np.nan)
    zero_distance = np.where(loaded, xi_zero * alpha, nan)
    bulge_distance = np.where(loaded, xi_bulge * alpha, nan)
    bulge_height = np.where(loaded, -deflection(xi_bulge), 0.0)
    def keep(v: np.ndarray) -> np.ndarray:
        return np.where(valid, v, np.nan).astype(np.float64)

    return FlexureProfile(flexural_parameter=keep(alpha), zero_crossing_distance=keep(zero_distance),
                          forebulge_distance=keep(bulge_distance), forebulge_height=keep(bulge_height),
                          max_deflection=keep(w_max), valid=valid)
