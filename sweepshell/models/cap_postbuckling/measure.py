"""Measures of a solved cap state: asymmetry, ridge line, polygon corners, the shape picture.

The ridge is, per angle θ, the radius where the meridional curvature of the deformed surface
is most convex. Whether it is polygonal is read from the ridge line's turning rate
``dφ/dθ`` (φ the direction of its tangent): 1 for a circle, a comb of corners for a polygon.
Its ``cos nθ`` amplitude ``A`` is scale-free (0 for a circle, 2 for sharp corners joined by
straight sides); ``A ≥ ½`` — the line turns at least three times as fast at its corners as
along its sides — counts as polygonal (``theory.md``).
"""

from __future__ import annotations

import math

import numpy as np

from sweepshell.models.cap_postbuckling.bordered import DenseBordered
from sweepshell.models.cap_postbuckling.operators import HarmonicCapProblem
from sweepshell.models.cap_postbuckling.surface import curvature_profile, deflection_harmonics

__all__ = ["CORNER_AMPLITUDE", "SHAPE_ANGLES", "SHAPE_RADII", "asymmetry", "land_on_deflection", "ridge_line",
           "shape", "turning_amplitude"]

SHAPE_RADII, SHAPE_ANGLES = 24, 72
#: cos nθ amplitude of the ridge line's turning rate (mean 1) from which the ridge counts as polygonal:
#: turning rates 1 + A at the corners and 1 − A along the sides, a ratio of 3 at A = ½
CORNER_AMPLITUDE = 0.5
_ASYM_ANGLES = 16  # angles in [0, π/n] at which the asymmetry is measured
_RIDGE_ANGLES = 33  # angles in [0, π/n] at which the ridge radius is located
_RIDGE_HARMONICS = 8  # cos(knθ) terms of the fitted ridge line


def asymmetry(pb: HarmonicCapProblem, z: np.ndarray) -> float:
    """Return max |ω − ω₀|/(2c) over the nodes and a fan of angles: the non-axisymmetric amplitude over h."""
    if pb.k == 0:
        return 0.0
    w, _, _ = pb.split(z)
    values = np.einsum("jab,jb->ja", pb.fw.value[1:], w[1:]) * pb.lam**2
    theta = np.linspace(0.0, np.pi / pb.n, _ASYM_ANGLES)
    field = np.cos(np.outer(theta, pb.n * np.arange(1, pb.k + 1))) @ values
    return float(np.abs(field).max() / (2.0 * pb.c))


def land_on_deflection(pb: HarmonicCapProblem, za: np.ndarray, zb: np.ndarray, target: float,
                       tol: float) -> np.ndarray | None:
    """Return the state with δ/h = ``target`` between path points ``za`` and ``zb`` (Newton, bordered)."""
    da, db = float(pb.apex_deflection(za)), float(pb.apex_deflection(zb))
    frac = 0.5 if db == da else min(max((target - da) / (db - da), 0.0), 1.0)
    z = za + frac * (zb - za)
    row = pb.deflection_row()
    for _ in range(12):
        r, jac = pb.evaluate(z)
        dz = DenseBordered(jac[None]).solve_bordered(row[None], -r[None],
                                                     np.array([target - float(pb.apex_deflection(z))]))[0]
        z = z + dz
        # a Newton step this small leaves an error of its square: far below the path's own tolerance
        if np.sqrt(np.mean(dz * dz)) < max(100.0 * tol, 1e-8) * max(1.0, float(np.sqrt(np.mean(z * z)))):
            return z
    return None


def ridge_line(pb: HarmonicCapProblem, z: np.ndarray, contact: float) -> tuple[np.ndarray, np.ndarray] | None:
    """Return angles in [0, π/n] and the ridge radius there (over a); None without an inverted region.

    The ridge is where the meridional curvature is most convex (most negative) outside the
    loaded contact and the edge zone (0 < r < 0.9a), located to a fraction of the sampling
    step by a parabola through the three samples around the minimum; there is one only where
    the surface inside it is inverted (concave somewhere).
    """
    radius = np.linspace(0.0, 0.9, 721)[1:]
    inner = radius > min(0.3, 3.0 * max(contact, 0.25) / pb.lam)
    theta = np.linspace(0.0, np.pi / max(pb.n, 1), _RIDGE_ANGLES)
    full = curvature_profile(pb, z, radius, theta)
    curv = full[:, inner]
    at = np.clip(np.argmin(curv, axis=1), 1, curv.shape[1] - 2)
    cut = np.searchsorted(radius, radius[inner][at])
    if not all(bool((full[q, :cut[q]] > 0.0).any()) for q in range(theta.size)):
        return None
    rows = np.arange(theta.size)
    left, mid, right = curv[rows, at - 1], curv[rows, at], curv[rows, at + 1]
    denom = left - 2.0 * mid + right
    shift = np.where(denom > 0.0, 0.5 * (left - right) / np.where(denom > 0.0, denom, 1.0), 0.0)
    step = radius[1] - radius[0]
    return theta, radius[inner][at] + np.clip(shift, -0.5, 0.5) * step


def turning_amplitude(theta: np.ndarray, radius: np.ndarray, n: int) -> float:
    """Return the ``cos nθ`` amplitude of the turning rate ``dφ/dθ`` of the closed curve ``r(θ)``.

    ``r`` is given on [0, π/n] of an n-fold symmetric, even curve; it is fitted by ``cos(knθ)``,
    k < 8, and differentiated exactly. ``dφ/dθ = (r² + 2r'² − r r'')/(r² + r'²)``: 1 for a circle,
    ``1 + a n² cos nθ`` for ``r = r̄(1 + a cos nθ)`` with small a, a comb of corners (amplitude
    2) for a polygon with sharp corners. The magnitude is returned (corners at θ = 0 or π/n).
    """
    k = np.arange(min(_RIDGE_HARMONICS, theta.size // 2))
    coef = np.linalg.lstsq(np.cos(np.outer(theta, n * k)), radius, rcond=None)[0]
    fine = np.linspace(0.0, np.pi / n, 721)
    c, s = np.cos(np.outer(fine, n * k)), np.sin(np.outer(fine, n * k))
    r, r1, r2 = c @ coef, -s @ (n * k * coef), -c @ ((n * k) ** 2 * coef)
    rate = (r * r + 2.0 * r1 * r1 - r * r2) / (r * r + r1 * r1)
    cos_n = np.cos(n * fine)
    return abs(float(2.0 * np.trapezoid(rate * cos_n, fine) / np.trapezoid(np.ones_like(fine), fine)))


def shape(pb: HarmonicCapProblem, z: np.ndarray) -> np.ndarray:
    """Return w/h (positive inwards) on ``SHAPE_RADII`` radii × ``SHAPE_ANGLES`` angles."""
    radius = np.linspace(0.0, 1.0, SHAPE_RADII)
    angle = 2.0 * np.pi * np.arange(SHAPE_ANGLES) / SHAPE_ANGLES
    coef = deflection_harmonics(pb, z, radius)  # (K+1, R)
    m = max(pb.n, 1) * np.arange(pb.k + 1)
    omega = np.einsum("jr,aj->ra", coef, np.cos(np.outer(angle, m)))
    return -omega / (2.0 * pb.c)


def ridge_measures(pb: HarmonicCapProblem, z: np.ndarray, contact: float) -> tuple[float, float]:
    """Return the mean ridge radius over √(Rh) and the number of corners (0: round); NaN, 0 without a ridge."""
    line = ridge_line(pb, z, contact)
    if line is None:
        return math.nan, 0.0
    theta, where = line
    mean = float(np.trapezoid(where, theta) / (theta[-1] - theta[0]))
    corners = pb.k > 0 and turning_amplitude(theta, where, pb.n) >= CORNER_AMPLITUDE
    return mean * pb.lam / math.sqrt(2.0 * pb.c), float(pb.n) if corners else 0.0
