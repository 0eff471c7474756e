"""Fields of a solved cap state on a polar grid: deflection harmonics and meridional curvature.

Harmonic 0 holds the slope ``Ȳ = Y + κPσ`` (``shallow_cap``'s unknown plus the exact
point-force slope): the deflection is ``W₀(x) = −∫ₓ¹ Ȳ`` (zero at the edge), its curvature
``Ȳ'``. Harmonics ``m ≥ 2`` hold ``u = x² v``.
"""

from __future__ import annotations

import numpy as np

from sweepshell.models.cap_postbuckling.operators import HarmonicCapProblem, split_quadrature
from sweepshell.numerics.radial_chebyshev import build_interpolation_matrix, to_chebyshev_coordinate

__all__ = ["curvature_profile", "deflection_harmonics"]

def _xi(pb: HarmonicCapProblem, radius: np.ndarray) -> np.ndarray:
    g = pb.grid
    return to_chebyshev_coordinate(np.asarray(radius, dtype=float), pb.size, g.stretch, g.centre)


def _force(pb: HarmonicCapProblem, z: np.ndarray) -> float:
    return float(z[-1]) * pb.load_scale if pb.apex else 0.0


def deflection_harmonics(pb: HarmonicCapProblem, z: np.ndarray, radius: np.ndarray) -> np.ndarray:
    """Return the harmonic coefficients of ω (= 2c w/h, positive upwards) at radii ``radius`` (over a), ``(K+1, R)``."""
    w, _, _ = pb.split(z)
    radius = np.asarray(radius, dtype=float)
    out = np.empty((pb.k + 1, radius.size))
    force = _force(pb, z)
    for i, r in enumerate(radius):
        # ∫ᵣ¹ Ȳ on two Gauss–Legendre panels (the force's slope varies over the contact width)
        pts, wts = split_quadrature(float(r), pb.contact_width or 0.02)
        slope = build_interpolation_matrix(pb.size, -1, _xi(pb, pts)) @ w[0] + pb.kappa * force * pb.force_slope(pts)[0]
        out[0, i] = -pb.lam**2 * float(wts @ slope)
    xi = _xi(pb, radius)
    for j in range(1, pb.k + 1):
        parity = 1 if (j * pb.n) % 2 == 0 else -1
        e = build_interpolation_matrix(pb.size, parity, xi)
        out[j] = pb.lam**2 * radius**2 * (e @ w[j])
    return out


def curvature_profile(pb: HarmonicCapProblem, z: np.ndarray, radius: np.ndarray, theta: np.ndarray) -> np.ndarray:
    """Return the meridional curvature ζ_rr/λ² of the deformed surface, ``(len(theta), len(radius))`` (radius > 0)."""
    w, _, _ = pb.split(z)
    g = pb.grid
    radius = np.asarray(radius, dtype=float)
    xi = _xi(pb, radius)
    coef = np.empty((pb.k + 1, radius.size))
    coef[0] = build_interpolation_matrix(pb.size, 1, xi) @ (g.d1[-1] @ w[0])
    coef[0] += pb.kappa * _force(pb, z) * pb.force_slope(radius)[1]
    for j in range(1, pb.k + 1):
        par = 1 if (j * pb.n) % 2 == 0 else -1
        same = build_interpolation_matrix(pb.size, par, xi)
        other = build_interpolation_matrix(pb.size, -par, xi)
        v = w[j]
        coef[j] = (2.0 * (same @ v) + 4.0 * radius * (other @ (g.d1[par] @ v))
                   + radius**2 * (same @ (g.d2[par] @ v)))
    base = pb.surface(radius)[1]
    cos = np.cos(np.outer(theta, pb.n * np.arange(pb.k + 1)))
    return cos @ coef + base[None, :]
