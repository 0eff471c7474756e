"""The cross-section of a uniformly bent, transversely curved strip: Ritz operators and batched solves.

Non-dimensional throughout (see ``theory.md`` beside this module): the width coordinate is
η = y/w ∈ [−½, ½], heights ζ = z/h, the longitudinal curvature k = κw²/h (its magnitude;
the sense enters through ``p``), energies per unit length Û = U w³/(D h²) and moments
m = M w/(D h). With c = w²/(R_t h) the natural transverse curvature, the section energy is

    Û(k, ζ) = ½ [12(1−ν²) k² ∫(Πζ)² dη + ∫(ζ'' − ζ₀'')² dη + 2νpk ∫(ζ'' − ζ₀'') dη + k²],

ζ₀ = cη²/2, Π the projection removing the constant and linear parts (no axial force, no
in-plane moment), p = −1 for opposite-sense bending (the longitudinal curvature's centre on
the convex side of the section) and p = +1 for equal-sense bending. ζ is expanded in the even
Legendre polynomials P₂(2η), P₄(2η), …, P_2N(2η) (a hierarchical Ritz basis: the first ``n``
functions of a larger basis are the ``n``-mode basis). They are orthogonal to 1 and η, so
Πζ = ζ and the stretching matrix is diagonal; the free-edge conditions are natural. For a
fixed k the energy is a positive definite quadratic in ζ: every k has exactly one
equilibrium section (symmetric, because the data are), found by one linear solve — a
division in the generalised eigenvectors of the bending and stretching matrices — and the
moment–curvature path needs no predictor or corrector. The limit point and the fold are
found from the exact derivatives ``m = ∂Û/∂k`` and ``dm/dk`` (implicit differentiation).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from numpy.polynomial import legendre

__all__ = [
    "SectionOperators",
    "SectionState",
    "find_fold",
    "find_peak",
    "make_section_operators",
    "solve_sections",
    "trace_section_shapes",
]

#: Gauss points per interval between two arc stations when a section is drawn
_SHAPE_GAUSS = 6


@dataclass(frozen=True)
class SectionOperators:
    """Ritz operators of the ``modes``-mode section basis, diagonalised.

    With B_ij = ∫ φᵢ''φⱼ'' dη (bending) and S_ij = ∫ φᵢφⱼ dη (stretching, diagonal), the
    generalised eigenvectors T (TᵀST = I, TᵀBT = diag Λ) decouple the section equations: in
    modal coordinates b (a = T b) the Hessian is diag(Λ + 12(1−ν²)k²), so every solve is a
    division. The eigenvectors come from the Cholesky factor of B (the low modes, which carry
    the response, are then accurate to rounding; checked against direct solves to 10⁻¹³).

    Attributes
    ----------
    eigenvalues
        Λ, increasing.
    modal_to_coefficients
        T: Ritz coefficients of the (scaled) Legendre functions from modal coordinates.
    natural
        Modal coordinates of ζ₀ = η²/2 (c = 1).
    edge_slope
        Tᵀg with gᵢ = ∫ φᵢ'' dη, the slope jump across the width.
    scale
        Scale of each Legendre function (unit diagonal of B).
    """

    modes: int
    eigenvalues: np.ndarray
    modal_to_coefficients: np.ndarray
    natural: np.ndarray
    edge_slope: np.ndarray
    scale: np.ndarray

    def slope_matrix(self, eta: np.ndarray) -> np.ndarray:
        """Return the matrix mapping modal coordinates to ζ'(η) at ``eta`` (shape ``(len(eta), modes)``)."""
        x = 2.0 * np.asarray(eta, dtype=float)
        out = np.empty((x.size, self.modes))
        for j in range(self.modes):
            c = np.zeros(2 * j + 3)
            c[-1] = 1.0
            out[:, j] = 2.0 * legendre.legval(x, legendre.legder(c)) * self.scale[j]
        return out @ self.modal_to_coefficients


@functools.lru_cache(maxsize=16)
def make_section_operators(modes: int) -> SectionOperators:
    """Return the (cached) diagonalised Ritz operators of the first ``modes`` even Legendre modes."""
    x, wq = legendre.leggauss(2 * modes + 8)  # exact for the degree-4N products
    wq = wq / 2.0  # dη = dx/2
    phi = np.empty((modes, x.size))
    d2 = np.empty((modes, x.size))
    for j in range(modes):
        c = np.zeros(2 * j + 3)
        c[-1] = 1.0
        phi[j] = legendre.legval(x, c)
        d2[j] = 4.0 * legendre.legval(x, legendre.legder(c, 2))
    bending = (d2 * wq) @ d2.T
    scale = 1.0 / np.sqrt(np.diag(bending))
    bending = bending * np.outer(scale, scale)
    stretching = np.diag((phi * wq) @ phi.T) * scale**2
    g = (d2 @ wq) * scale
    natural = np.zeros(modes)
    natural[0] = (1.0 / 12.0) / scale[0]  # η²/2 = P₂(2η)/12 + constant
    # S x = μ B x through B = L Lᵀ: Λ = 1/μ; T = L⁻ᵀ W μ^(-1/2)
    chol = np.linalg.cholesky(bending)
    l_inv = np.linalg.solve(chol, np.eye(modes))
    mu, vecs = np.linalg.eigh((l_inv * stretching[None, :]) @ l_inv.T)
    order = np.argsort(-mu)
    mu, vecs = mu[order], vecs[:, order]
    to_coeff = (l_inv.T @ vecs) / np.sqrt(mu)[None, :]
    modal_natural = to_coeff.T @ (stretching * natural)  # b = Tᵀ S a, since TᵀST = I
    ops = SectionOperators(modes, 1.0 / mu, to_coeff, modal_natural, to_coeff.T @ g, scale)
    for arr in (ops.eigenvalues, ops.modal_to_coefficients, ops.natural, ops.edge_slope, ops.scale):
        arr.setflags(write=False)
    return ops


@dataclass(frozen=True)
class SectionState:
    """Equilibrium sections at given curvatures (arrays broadcast over the batch).

    Attributes
    ----------
    modal
        Modal coordinates b of the section, shape ``(..., modes)`` (Ritz coefficients a = T b).
    energy
        Û, the energy per unit length over D h²/w³.
    moment
        m = ∂Û/∂k, the moment magnitude over D h/w.
    tangent
        dm/dk along the equilibrium path.
    """

    modal: np.ndarray
    energy: np.ndarray
    moment: np.ndarray
    tangent: np.ndarray


def solve_sections(ops: SectionOperators, c: np.ndarray, nu: np.ndarray, p: np.ndarray,
                   k: np.ndarray) -> SectionState:
    """Solve the equilibrium section at curvatures ``k`` (all arguments broadcast together).

    Parameters
    ----------
    ops
        Section operators (their ``modes`` set the resolution).
    c, nu, p
        Natural curvature w²/(R_t h), Poisson's ratio and the bending sense (−1 opposite, +1 equal).
    k
        Longitudinal curvature magnitudes κw²/h (≥ 0).
    """
    c, nu, p, k = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (c, nu, p, k)))
    lam = ops.eigenvalues
    g = ops.edge_slope
    b0 = c[..., None] * ops.natural
    stiff = 12.0 * (1.0 - nu**2)
    stretch = stiff * k**2
    denom = lam + stretch[..., None]
    npk = nu * p * k
    b = (lam * b0 - npk[..., None] * g) / denom
    bb = np.sum(b * b, axis=-1)
    db = b - b0
    slope = db @ g
    energy = 0.5 * (stretch * bb + np.sum(lam * db * db, axis=-1) + 2.0 * npk * slope + k**2)
    moment = stiff * k * bb + nu * p * slope + k
    # dm/dk = ∂²Û/∂k² − rᵀ H⁻¹ r with r = ∂²Û/∂b∂k = 2·12(1−ν²) k b + νp Tᵀg
    r = (2.0 * stiff * k)[..., None] * b + (nu * p)[..., None] * g
    tangent = stiff * bb + 1.0 - np.sum(r * r / denom, axis=-1)
    return SectionState(b, energy, moment, tangent)


def _bracketed_root(fun, lo: np.ndarray, hi: np.ndarray, iterations: int) -> np.ndarray:
    """Return a root of ``fun`` in each bracket [lo, hi] (signs differ at the ends), vectorised.

    The Illinois variant of regula falsi: the bracket always holds the root and shrinks
    superlinearly; rows stop moving once their bracket is below 10⁻¹³ relative.
    """
    f_lo, f_hi = fun(lo), fun(hi)
    side = np.zeros(lo.shape, dtype=int)
    for _ in range(iterations):
        # a row stops once its bracket is below 10⁻¹³ relative, so its answer never depends on the batch
        active = hi - lo > 1e-13 * hi
        if not active.any():
            break
        with np.errstate(divide="ignore", invalid="ignore"):
            x = (lo * f_hi - hi * f_lo) / (f_hi - f_lo)
        x = np.where(np.isfinite(x) & (x > lo) & (x < hi), x, 0.5 * (lo + hi))
        f_x = fun(x)
        left = active & (np.sign(f_x) == np.sign(f_lo))
        right = active & ~left
        lo, f_lo = np.where(left, x, lo), np.where(left, f_x, f_lo)
        hi, f_hi = np.where(right, x, hi), np.where(right, f_x, f_hi)
        # Illinois: halve the stale end's value when the same end is kept twice
        f_hi = np.where(left & (side == 1), 0.5 * f_hi, f_hi)
        f_lo = np.where(right & (side == -1), 0.5 * f_lo, f_lo)
        side = np.where(left, 1, np.where(right, -1, side))
    return 0.5 * (lo + hi)


def find_peak(ops: SectionOperators, c: np.ndarray, nu: np.ndarray, p: np.ndarray, grid: np.ndarray,
              tangent: np.ndarray, iterations: int = 60) -> tuple[np.ndarray, np.ndarray]:
    """Return the curvature of the first moment maximum per point (NaN where the moment only rises).

    Parameters
    ----------
    grid, tangent
        Curvature samples (shape ``(n, K)``, increasing) and dm/dk there; the first sign change
        of dm/dk from + to − brackets the limit point, refined by regula falsi on dm/dk.

    Returns
    -------
    k_peak, found
        The limit-point curvature (NaN where none) and a boolean mask.
    """
    down = (tangent[:, :-1] > 0.0) & (tangent[:, 1:] <= 0.0)
    found: np.ndarray = np.asarray(down.any(axis=1))
    first = np.argmax(down, axis=1)
    rows = np.arange(grid.shape[0])
    k_peak = np.full(grid.shape[0], np.nan)
    if found.any():
        sel = rows[found]
        lo, hi = grid[sel, first[sel]], grid[sel, first[sel] + 1]
        cs, ns, ps = c[sel], nu[sel], p[sel]
        k_peak[sel] = _bracketed_root(lambda kk: solve_sections(ops, cs, ns, ps, kk).tangent, lo, hi, iterations)
    return k_peak, found


def find_fold(ops: SectionOperators, c: np.ndarray, nu: np.ndarray, p: np.ndarray, grid: np.ndarray,
              moment: np.ndarray, energy: np.ndarray, k_peak: np.ndarray,
              iterations: int = 60) -> tuple[np.ndarray, np.ndarray]:
    """Return the curvature of the fully formed fold (NaN where no localised fold exists).

    A fold of total rotation θ made of material at curvature k costs Û(k)θ/k; the fold takes the
    curvature minimising Û/k past the limit point (the Maxwell construction: there m = Û/k, the
    moment that propagates the fold). d(Û/k)/dk = (k m − Û)/k² changes sign from − to + there.
    """
    n = grid.shape[0]
    k_fold = np.full(n, np.nan)
    with np.errstate(invalid="ignore"):
        past = grid > k_peak[:, None]
    f = grid * moment - energy
    up = (f[:, :-1] < 0.0) & (f[:, 1:] >= 0.0) & past[:, :-1]
    found: np.ndarray = np.asarray(up.any(axis=1))
    first = np.argmax(up, axis=1)
    rows = np.arange(n)
    if found.any():
        sel = rows[found]
        lo, hi = grid[sel, first[sel]], grid[sel, first[sel] + 1]
        cs, ns, ps = c[sel], nu[sel], p[sel]

        def excess(kk: np.ndarray) -> np.ndarray:
            st = solve_sections(ops, cs, ns, ps, kk)
            return kk * st.moment - st.energy

        k_fold[sel] = _bracketed_root(excess, lo, hi, iterations)
    return k_fold, found


@functools.lru_cache(maxsize=16)
def _shape_quadrature(modes: int, stations: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Gauss nodes and weights between the stations of the half width, and the slope matrix there."""
    half = np.linspace(0.0, 0.5, (stations + 1) // 2)
    xg, wg = legendre.leggauss(_SHAPE_GAUSS)
    left, right = half[:-1], half[1:]
    nodes = (0.5 * (left + right))[:, None] + 0.5 * (right - left)[:, None] * xg[None, :]
    weights = 0.5 * (right - left)[:, None] * wg[None, :]
    return nodes, weights, make_section_operators(modes).slope_matrix(nodes.reshape(-1))


def trace_section_shapes(ops: SectionOperators, modal: np.ndarray, stations: int,
                         slope_scale: np.ndarray) -> np.ndarray:
    """Return the drawn sections (y, z) at ``stations`` equally spaced arc-length stations, over w.

    The shallow-shell slope ζ'(η)·h/w is taken as the section's angle φ(s) at arc length
    s = wη, so the section is integrated exactly from its curvature: y = ∫cos φ ds,
    z = ∫sin φ ds from the crown (η = 0, z = 0). The unloaded section is then the circular arc
    of radius R_t and arc length w. Returns shape ``(..., 2, stations)`` in units of w.
    """
    if stations % 2 == 0:
        raise ValueError(f"stations must be odd (the crown is a station); got {stations}")
    nodes, weights, slope = _shape_quadrature(ops.modes, stations)
    phi = (modal @ slope.T) * np.asarray(slope_scale)[..., None]
    phi = phi.reshape(*phi.shape[:-1], *nodes.shape)
    dy = np.sum(np.cos(phi) * weights, axis=-1)
    dz = np.sum(np.sin(phi) * weights, axis=-1)
    zeros = np.zeros((*dy.shape[:-1], 1))
    y_half = np.concatenate([zeros, np.cumsum(dy, axis=-1)], axis=-1)
    z_half = np.concatenate([zeros, np.cumsum(dz, axis=-1)], axis=-1)
    y = np.concatenate([-y_half[..., :0:-1], y_half], axis=-1)
    z = np.concatenate([z_half[..., :0:-1], z_half], axis=-1)
    shape = np.stack([y, z], axis=-2)
    shape[np.isnan(modal).any(axis=-1)] = np.nan
    return shape
