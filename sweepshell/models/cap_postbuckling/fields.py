"""Radial and angular operators of the n-fold symmetric cap (``cap_postbuckling``).

Harmonic 0 is written as ``shallow_cap`` writes its axisymmetric state: the slopes
``Y = W₀'`` and ``F = −P₀'`` (odd functions on the half grid), so the harmonic-0 "field" below
maps those slopes to the curvature and ``x``-times-slope factors of the brackets. Harmonics
``m = jn ≥ 2`` use the substitution ``u = x² v`` of
:func:`sweepshell.models.shallow_cap.modes.build_mode_operators`.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import special

from sweepshell.models.shallow_cap.modes import build_mode_operators
from sweepshell.numerics.radial_chebyshev import build_radial_grid

__all__ = ["RadialField", "angular_rule", "contact_slope", "make_radial_fields"]

_EULER_GAMMA = 0.5772156649015329


@dataclass(frozen=True)
class RadialField:
    """Radial operators of one field, stacked over harmonics ``(K+1, M, M)``.

    ``value``, ``slope``, ``curvature``: the field and its first two x-derivatives from the
    unknowns; ``bilaplacian``: ``x²∇⁴_m``; ``p2`` = ``x u' − m² u`` and ``p3`` = ``−m (u' − u/x)``,
    the radial factors of ``x A_r + A_θθ`` (cosine) and ``A_rθ − A_θ/x`` (sine); ``third``: the
    third derivative's edge row ``(K+1, M)``. Harmonic 0 acts on the slope unknown (``Y`` of the
    deflection, ``F = −P₀'`` of the stress function): its ``slope`` is ``±I``, its ``curvature``
    ``±d/dx``, its ``value``, ``bilaplacian`` and ``third`` are unused (zero).
    """

    value: np.ndarray
    slope: np.ndarray
    curvature: np.ndarray
    bilaplacian: np.ndarray
    p2: np.ndarray
    p3: np.ndarray
    third: np.ndarray


@lru_cache(maxsize=64)
def make_radial_fields(size: int, wave_number: int, harmonics: int, stretch: float,
                       centre: float = 0.0) -> tuple[RadialField, RadialField]:
    """Return the deflection and stress operators of harmonics ``0, n, …, Kn`` (cached)."""
    g = build_radial_grid(size, stretch, centre)
    x = g.x
    zero = np.zeros((size, size))
    parts: dict[str, list[list[np.ndarray]]] = {"w": [[] for _ in range(7)], "f": [[] for _ in range(7)]}
    for j in range(harmonics + 1):
        m = j * wave_number
        if m == 0:
            for key, sign in (("w", 1.0), ("f", -1.0)):
                ops = (zero, sign * np.eye(size), sign * g.d1[-1], zero, sign * np.diag(x), zero, np.zeros(size))
                for slot, arr in enumerate(ops):
                    parts[key][slot].append(arr)
            continue
        mode = build_mode_operators(size, m, stretch, centre)
        for key, fo in (("w", mode.deflection), ("f", mode.stress)):
            p2 = x[:, None] * fo.w1 - m * m * fo.w0
            p3 = -m * (fo.w1 - fo.w0 / x[:, None])
            for slot, arr in enumerate((fo.w0, fo.w1, fo.w2, fo.bilaplacian, p2, p3, fo.w3_edge)):
                parts[key][slot].append(arr)
    out = []
    for key in ("w", "f"):
        arrs = [np.stack(a) for a in parts[key]]
        for a in arrs:
            a.setflags(write=False)
        out.append(RadialField(*arrs))
    return out[0], out[1]


@lru_cache(maxsize=64)
def angular_rule(wave_number: int, harmonics: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Return ``(θ_q, cos, sin, projection)``: midpoints on [0, π/n] and the synthesis/projection matrices.

    ``Q = ⌊3K/2⌋ + 1`` midpoints integrate the products of two fields of harmonics ≤ K with a
    third exactly, so projecting the quadratic brackets on ``cos(lnθ)`` is a Galerkin step.
    """
    q = harmonics * 3 // 2 + 1
    n = max(wave_number, 1)
    theta = (np.arange(q) + 0.5) * np.pi / (n * q)
    m = n * np.arange(harmonics + 1)
    cos = np.cos(np.outer(theta, m))
    sin = np.sin(np.outer(theta, m))
    proj = (np.where(m == 0, 1.0, 2.0) / q)[:, None] * cos.T
    return theta, cos, sin, proj


def contact_slope(x: np.ndarray, width: float) -> tuple[np.ndarray, np.ndarray]:
    """Return ``σ_ε`` and ``σ_ε'``: the point-force slope ``σ = −½ x log x`` with the force spread over a Gaussian.

    ``σ_ε`` solves ``x L[σ_ε] = −(1 − exp(−x²/ε²))`` (the force ``exp(−x²/ε²)/(π ε²)`` per unit
    area instead of a point force, ``x L[σ] = −1``), regular at 0; away from the contact it
    differs from ``σ`` by ``−ε²/(4x)`` (the load's second moment) and exponentially small terms::

        σ_ε = x [−¼ Ein(s) − ¼ (1 − e^{−s})/s − ½ log ε + γ/4],   s = x²/ε²,
        σ_ε' = σ_ε/x − ½ + ½ (1 − e^{−s})/s,

    with ``Ein(s) = E₁(s) + log s + γ``. Its curvature ``σ_ε'`` is bounded (``σ'`` grows like
    ``log x``).
    """
    s = (x / width) ** 2
    ein = special.exp1(s) + np.log(s) + _EULER_GAMMA
    share = -np.expm1(-s) / s
    phi = -0.25 * ein - 0.25 * share - 0.5 * np.log(width) + 0.25 * _EULER_GAMMA
    return x * phi, phi - 0.5 + 0.5 * share
