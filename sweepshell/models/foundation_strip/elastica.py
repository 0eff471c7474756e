"""Discrete elastica of an inextensible strip on a hydrostatic foundation (energy, gradient, Hessian).

Units: lengths in ℓ = (B/K)^{1/4}, forces in √(BK), energies per unit width in √(BK)·ℓ,
so that B = K = 1. The strip of length L is cut into N straight segments of length
h = L/N; segment i makes the angle φᵢ with the foundation surface. Node heights are
yⱼ = h Σ_{i<j} sin φᵢ (y₀ = 0) and segment mid-heights ȳᵢ = yᵢ + (h/2) sin φᵢ. The
stress-free (imperfect) shape has angles φ⁰ᵢ and mid-heights ȳ⁰ᵢ.

Discrete energy (hydrostatic foundation: its energy is counted per horizontal length,
dx = cos φ ds, as for a sheet floating on a liquid, Diamant & Witten 2011):

    E(φ) = Σᵢ (φᵢ₊₁ − φᵢ − κ⁰ᵢ)²/(2h) + Σᵢ h cos φᵢ V(ȳᵢ − ȳ⁰ᵢ),
    V(u) = u²/2 + c u⁴/4,

with c the normalised cubic foundation coefficient (c < 0 softening, c > 0 stiffening).
Both ends are pinned on the foundation surface: y_N = h Σ sin φᵢ = 0, no end moment
(natural in the discrete energy). The end-shortening Δ = h Σ (1 − cos φᵢ) is imposed; its
multiplier is the compressive force P, the multiplier of y_N = 0 the vertical reaction R:

    ∇E − P h sin φ + R h cos φ = 0.

The foundation couples every segment to the heights of all segments on its left, so the
Hessian is dense; it is assembled in O(N²) from cumulative sums rather than a matrix
product. The scheme is second-order accurate in h.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "StripGrid",
    "StripProblem",
    "build_strip_grid",
    "build_strip_problem",
    "compute_crest_contrast",
    "compute_critical_mode",
    "compute_discrete_onset",
    "compute_energy",
    "compute_gradient",
    "compute_hessian",
    "compute_node_heights",
    "count_half_waves",
]


@dataclass(frozen=True)
class StripGrid:
    """Segments of a strip: count ``n``, ``length`` L and ``h`` (units of ℓ), index helpers."""

    n: int
    length: float
    h: float
    lower: np.ndarray  # T_ik = 1 for k < i, 1/2 for k = i: ∂ȳᵢ/∂φₖ = h T_ik cos φₖ
    max_index: np.ndarray  # max(i, k)


@dataclass(frozen=True)
class StripProblem:
    """A strip on a foundation: grid, stress-free shape and foundation nonlinearity."""

    grid: StripGrid
    phi0: np.ndarray
    ybar0: np.ndarray
    kappa0: np.ndarray
    cubic: float
    slack0: float  # h Σ (1 − cos φ⁰): end-shortening already taken by the imperfection


def build_strip_grid(length: float, segments: int) -> StripGrid:
    """Return the grid of a strip of ``length`` (units of ℓ) cut into ``segments`` segments."""
    idx = np.arange(segments)
    lower = np.tril(np.ones((segments, segments)), -1) + 0.5 * np.eye(segments)
    return StripGrid(n=segments, length=float(length), h=float(length) / segments, lower=lower,
                     max_index=np.maximum.outer(idx, idx))


def build_strip_problem(grid: StripGrid, *, imperfection: float, width: float, cubic: float) -> StripProblem:
    """Return a strip whose stress-free shape is a localised wrinkle at mid-length.

    Parameters
    ----------
    grid
        The segments.
    imperfection
        Amplitude of the stress-free shape, units of ℓ.
    width
        Width of its sech envelope, units of ℓ.
    cubic
        Normalised cubic foundation coefficient c = K₃ ℓ²/K.

    Notes
    -----
    The shape is y⁰ = a sech(ξ/width) cos ξ with ξ = x − L/2 (the critical wavenumber is 1
    in units of 1/ℓ), minus the straight line through its end values so that both ends
    stay on the foundation surface.
    """
    s = np.linspace(0.0, grid.length, grid.n + 1)
    xi = s - 0.5 * grid.length
    y0 = imperfection / np.cosh(xi / width) * np.cos(xi)
    y0 = y0 - y0[0] - (y0[-1] - y0[0]) * s / grid.length
    # segments inherit the chord slope of the nodes (the arc-length shift is O(a²))
    phi0 = np.arcsin(np.clip(np.diff(y0) / grid.h, -1.0, 1.0))
    ybar0 = _mid_heights(phi0, grid.h)
    return StripProblem(grid=grid, phi0=phi0, ybar0=ybar0, kappa0=np.diff(phi0), cubic=float(cubic),
                        slack0=float(grid.h * np.sum(1.0 - np.cos(phi0))))


def _mid_heights(phi: np.ndarray, h: float) -> np.ndarray:
    s = np.sin(phi)
    return h * (np.cumsum(s) - 0.5 * s)


def compute_node_heights(phi: np.ndarray, h: float) -> np.ndarray:
    """Return the N + 1 node heights y (units of ℓ) of segment angles ``phi``."""
    return np.concatenate(([0.0], h * np.cumsum(np.sin(phi))))


def _foundation(u: np.ndarray, c: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    u2 = u * u
    return 0.5 * u2 + 0.25 * c * u2 * u2, u + c * u2 * u, 1.0 + 3.0 * c * u2


def _suffix_sum(v: np.ndarray) -> np.ndarray:
    """Σ_{i>k} vᵢ for every k."""
    out = np.empty_like(v)
    out[-1] = 0.0
    out[:-1] = np.cumsum(v[::-1])[::-1][1:]
    return out


def compute_energy(problem: StripProblem, phi: np.ndarray) -> float:
    """Return the discrete energy E(φ) (bending + foundation), units of √(BK)·ℓ."""
    g = problem.grid
    bend = np.sum((np.diff(phi) - problem.kappa0) ** 2) / (2.0 * g.h)
    u = _mid_heights(phi, g.h) - problem.ybar0
    V, _, _ = _foundation(u, problem.cubic)
    return float(bend + g.h * np.sum(np.cos(phi) * V))


def compute_gradient(problem: StripProblem, phi: np.ndarray) -> np.ndarray:
    """Return ∇E(φ) (N values)."""
    g = problem.grid
    h = g.h
    e = (np.diff(phi) - problem.kappa0) / h
    grad = np.zeros_like(phi)
    grad[1:] += e
    grad[:-1] -= e
    cos, sin = np.cos(phi), np.sin(phi)
    u = _mid_heights(phi, h) - problem.ybar0
    V, dV, _ = _foundation(u, problem.cubic)
    q = h * cos * dV
    S = _suffix_sum(q) + 0.5 * q
    return grad + h * cos * S - h * sin * V


def compute_hessian(problem: StripProblem, phi: np.ndarray) -> np.ndarray:
    """Return the Hessian ∇²E(φ) (N × N, dense, symmetric)."""
    g = problem.grid
    h = g.h
    cos, sin = np.cos(phi), np.sin(phi)
    u = _mid_heights(phi, h) - problem.ybar0
    V, dV, d2V = _foundation(u, problem.cubic)
    q = h * cos * dV
    S = _suffix_sum(q) + 0.5 * q
    w = h * cos * d2V
    sw = _suffix_sum(w)
    M = (sw + 0.5 * w)[g.max_index]
    np.fill_diagonal(M, sw + 0.25 * w)
    hc = h * cos
    H = M * np.outer(hc, hc)
    X = (-h * sin * dV)[:, None] * (h * g.lower * cos[None, :])
    H += X + X.T
    diag = np.full(g.n, 2.0 / h)
    diag[0] = diag[-1] = 1.0 / h
    H[np.diag_indices(g.n)] += diag - h * sin * S - h * cos * V
    off = np.arange(g.n - 1)
    H[off, off + 1] -= 1.0 / h
    H[off + 1, off] -= 1.0 / h
    return H


def compute_crest_contrast(y: np.ndarray) -> tuple[float, float]:
    """Return ``(contrast, amplitude)`` of a deflection profile ``y`` (node heights).

    The crests are the interior local extrema of y; ``amplitude`` is the largest |y| at a
    crest and ``contrast`` that amplitude over the median crest amplitude. A uniform
    wrinkle has contrast ≈ 1; a fold, whose neighbouring crests decay away from it, a
    large contrast. Fewer than three crests count as a fold (contrast = inf).
    """
    dy = np.diff(y)
    idx = np.nonzero(dy[:-1] * dy[1:] < 0.0)[0] + 1
    if idx.size == 0:
        return np.inf, float(np.max(np.abs(y)))
    amps = np.abs(y[idx])
    amp = float(np.max(amps))
    med = float(np.median(amps))
    if idx.size < 3 or med <= 0.0:
        return np.inf, amp
    return amp / med, amp


def compute_critical_mode(problem: StripProblem) -> tuple[float, float, np.ndarray]:
    """Return ``(P_c, P_next, mode)`` of the flat state φ = 0 of a perfect ``problem``.

    The two smallest P with (∇²E)v = P h v on the subspace Σ vᵢ = 0 (pinned ends, the
    linearised y_N = 0) and the segment angles v of the smallest, unit length, signed so
    that the first node height larger than half the largest is positive. Units: P in
    √(BK). ``P_next`` tells how isolated the first bifurcation is.
    """
    g = problem.grid
    H = compute_hessian(problem, np.zeros(g.n))
    # an orthonormal basis of {Σ v = 0}: a Householder reflection maps e₁ onto −1/√n
    u = np.ones(g.n)
    u[0] += np.sqrt(g.n)
    basis = (np.eye(g.n) - np.outer(u, u) * (2.0 / float(u @ u)))[:, 1:]
    vals, vecs = np.linalg.eigh(basis.T @ H @ basis)
    mode = basis @ vecs[:, 0]
    y = compute_node_heights(mode, g.h)
    first = int(np.nonzero(np.abs(y) > 0.5 * np.max(np.abs(y)))[0][0])
    if y[first] < 0.0:
        mode = -mode
    return float(vals[0] / g.h), float(vals[1] / g.h), mode / float(np.linalg.norm(mode))


def compute_discrete_onset(grid: StripGrid) -> tuple[float, float]:
    """Return the buckling load and wavelength of the flat, perfect discrete strip.

    The smallest P with (∇²E)v = P h v on the subspace Σ vᵢ = 0 (pinned ends, see
    :func:`compute_critical_mode`); the wavelength is 2L over the number of sign changes
    of the mode's heights plus one. Units: P in √(BK), wavelength in ℓ.
    """
    problem = build_strip_problem(grid, imperfection=0.0, width=1.0, cubic=0.0)
    p, _, mode = compute_critical_mode(problem)
    return p, 2.0 * grid.length / count_half_waves(compute_node_heights(mode, grid.h))


def count_half_waves(y: np.ndarray) -> int:
    """Return the number of half-waves of node heights ``y`` (interior sign changes + 1)."""
    core = y[1:-1]
    core = core[np.abs(core) > 1e-9 * np.max(np.abs(core))]
    return 1 + int(np.count_nonzero(np.diff(np.sign(core))))
