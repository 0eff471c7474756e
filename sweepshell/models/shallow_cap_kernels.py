"""Discrete operators of the shallow-cap model: axisymmetric residual and stability matrices.

Notation of :mod:`sweepshell.models.shallow_cap` (read its docstring first): ``x = r/a``,
``y = ω'`` the deflection slope and ``f = −Φ'`` the compressive stress-function slope, both
stored divided by λ² (``Y = y/λ²``, ``F = f/λ²``); ``ŝ(x) = x − g(x)/λ²`` is the stress-free
slope (sphere minus dimple) over λ². Equations (integrated once, collocated at the interior
half-grid nodes, multiplied by ``1/λ⁴``)::

    −ε x L[Y] + F (ŝ − Ȳ) − 2 q x² = 0,      ε x L[F] + ŝ Ȳ − Ȳ²/2 = 0,
    L[u] = u'' + u'/x − u/x²,   ε = 1/λ²,   Ȳ = Y + κ P σ(x),

with the apex-force singularity ``σ = −½ x log x`` (``x L[σ] = −1``) removed analytically,
``κ = 2c²/π`` and ``P = F_apex R/(E h³)``.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from sweepshell.numerics.radial_chebyshev import RadialGrid, make_radial_grid

__all__ = [
    "CapPathProblem",
    "compute_mode_determinants",
    "make_mode_operators",
    "singular_slope",
]


def singular_slope(x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return ``σ = −½ x log x`` and its first two derivatives at ``x > 0``."""
    lg = np.log(x)
    return -0.5 * x * lg, -0.5 * (lg + 1.0), -0.5 / x


@dataclass
class CapPathProblem:
    """Batched axisymmetric residual ``R(z)`` of many caps, ``z = (Y, F, μ)``.

    Attributes (arrays over problems)
    ---------------------------------
    grid
        Half grid of ``M`` nodes.
    lam, nu
        Shell parameter λ and Poisson's ratio ν.
    clamped, immovable, apex
        Bool: clamped (else pinned) edge, immovable (else radially sliding) in-plane edge,
        apex force (else pressure).
    imperfection
        ``(n, M)`` dimple slope over λ² at the nodes, ``g/λ²``.
    force_scale
        Apex-force unit of ``μ``: ``P = force_scale·μ`` (1 for pressure, where ``μ = q``).
    """

    grid: RadialGrid
    lam: np.ndarray
    nu: np.ndarray
    clamped: np.ndarray
    immovable: np.ndarray
    apex: np.ndarray
    imperfection: np.ndarray
    force_scale: np.ndarray

    def __post_init__(self) -> None:
        g = self.grid
        x = g.x
        self.size = g.size
        self.xl = x[:, None] * g.d2[-1] + g.d1[-1] - np.diag(1.0 / x)
        self.sigma, self.dsigma, _ = singular_slope(x)
        c = np.sqrt(3.0 * (1.0 - self.nu**2))
        self.kappa = 2.0 * c**2 / np.pi
        # the stretching block εA with its edge row depends on the point only: invert once
        m = g.size
        stretch = (1.0 / self.lam**2)[:, None, None] * self.xl[None]
        d1 = g.d1[-1][0]
        stretch[:, 0, :] = np.where(self.immovable[:, None], d1[None, :] - self.nu[:, None] * np.eye(1, m),
                                    np.eye(1, m))
        self.stretch_inverse = np.linalg.inv(stretch)

    @property
    def unknowns(self) -> int:
        return 2 * self.size

    def split(self, z: np.ndarray, idx: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Return ``Y, F, q, P`` (pressure in p_cl, apex force in E h³/R) of states ``z``."""
        m = self.size
        mu = z[:, -1]
        apex = self.apex[idx]
        return z[:, :m], z[:, m:2 * m], np.where(apex, 0.0, mu), np.where(apex, mu * self.force_scale[idx], 0.0)

    def total_slope(self, z: np.ndarray, idx: np.ndarray) -> np.ndarray:
        """Return ``Ȳ = y/λ²`` at the nodes, the regular part plus the apex singularity."""
        y, _, _, p = self.split(z, idx)
        return y + (self.kappa[idx] * p)[:, None] * self.sigma[None, :]

    def linearize(self, z: np.ndarray, idx: np.ndarray) -> tuple[np.ndarray, CapLinearization]:
        """Return the residual ``(k, 2M)`` and the structured Jacobian at states ``z``."""
        m = self.size
        k = z.shape[0]
        x = self.grid.x
        y, f, q, p = self.split(z, idx)
        eps = 1.0 / self.lam[idx] ** 2
        kap = self.kappa[idx]
        nu = self.nu[idx]
        apex = self.apex[idx]
        ybar = y + (kap * p)[:, None] * self.sigma[None, :]
        shat = x[None, :] - self.imperfection[idx]
        arm = shat - ybar
        r = np.empty((k, 2 * m))
        r[:, :m] = -eps[:, None] * np.einsum("ij,kj->ki", self.xl, y) + f * arm - 2.0 * q[:, None] * x[None, :] ** 2
        r[:, m:] = eps[:, None] * np.einsum("ij,kj->ki", self.xl, f) + shat * ybar - 0.5 * ybar**2
        d1 = self.grid.d1[-1][0]
        cl = self.clamped[idx]
        r[:, 0] = np.where(cl, y[:, 0], np.einsum("j,kj->k", d1, y) + nu * y[:, 0] - 0.5 * kap * p)
        im = self.immovable[idx]
        r[:, m] = np.where(im, np.einsum("j,kj->k", d1, f) - nu * f[:, 0], f[:, 0])
        # Jacobian blocks: J11 dense, J12 = J21 = diag(arm) (zero on the edge rows), J22 = εA fixed
        j11 = -eps[:, None, None] * self.xl[None]
        diag = np.arange(m)
        j11[:, diag, diag] -= f
        j11[:, 0, :] = np.where(cl[:, None], np.eye(1, m)[0][None, :], d1[None, :] + nu[:, None] * np.eye(1, m))
        arm0 = arm.copy()
        arm0[:, 0] = 0.0
        dp = np.where(apex, kap * self.force_scale[idx], 0.0)
        j1mu = np.where(apex[:, None], -f * self.sigma[None, :] * dp[:, None], -2.0 * x[None, :] ** 2)
        j1mu[:, 0] = np.where(cl, 0.0, -0.5 * dp)
        j2mu = arm0 * self.sigma[None, :] * dp[:, None]
        return r, CapLinearization(j11=j11, arm=arm0, j1mu=j1mu, j2mu=j2mu, b=self.stretch_inverse[idx])

    def evaluate(self, z: np.ndarray, idx: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Return the residual and the dense Jacobian ``∂R/∂z`` ``(k, 2M, 2M+1)`` (for tests)."""
        r, lin = self.linearize(z, idx)
        m = self.size
        k = z.shape[0]
        jz = np.zeros((k, 2 * m, 2 * m + 1))
        diag = np.arange(m)
        jz[:, :m, :m] = lin.j11
        jz[:, :m, m:2 * m][:, diag, diag] = lin.arm
        jz[:, m:, :m][:, diag, diag] = lin.arm
        jz[:, m:, m:2 * m] = np.linalg.inv(lin.b)
        jz[:, :m, -1] = lin.j1mu
        jz[:, m:, -1] = lin.j2mu
        return r, jz

    def apex_deflection(self, z: np.ndarray, idx: np.ndarray) -> np.ndarray:
        """Apex deflection over thickness, ``δ/h = (λ²/2c) ∫₀¹ Ȳ dx`` (positive inwards)."""
        y, _, _, p = self.split(z, idx)
        lam2 = self.lam[idx] ** 2
        c = np.sqrt(3.0 * (1.0 - self.nu[idx] ** 2))
        integral = np.einsum("j,kj->k", self.grid.integral[-1], y) + self.kappa[idx] * p / 8.0
        return lam2 / (2.0 * c) * integral

    def volume_change(self, z: np.ndarray, idx: np.ndarray) -> np.ndarray:
        """Swept volume over the cap volume, ``ΔV/V_cap = 4 ∫₀¹ Ȳ x² dx`` (2 at mirror inversion)."""
        y, _, _, p = self.split(z, idx)
        return 4.0 * (np.einsum("j,kj->k", self.grid.moment2[-1], y) + self.kappa[idx] * p / 32.0)


@dataclass(frozen=True)
class CapLinearization:
    """Jacobian of :class:`CapPathProblem` in block form, solved by a Schur complement.

    ``J = [[j11, diag(arm)], [diag(arm), b⁻¹]]`` over ``(Y, F)`` plus the load column
    ``(j1mu, j2mu)``. The stretching block is eliminated, so each bordered solve is one
    ``(M+1)``-square system instead of ``(2M+1)``.
    """

    j11: np.ndarray
    arm: np.ndarray
    j1mu: np.ndarray
    j2mu: np.ndarray
    b: np.ndarray

    def solve_bordered(self, row: np.ndarray, r: np.ndarray, c: np.ndarray) -> np.ndarray:
        """Solve ``[J; row] d = [r; c]`` for ``d = (dY, dF, dμ)``."""
        k, m = self.arm.shape
        arm, b = self.arm, self.b
        r1, r2 = r[:, :m], r[:, m:]
        ry, rf, rmu = row[:, :m], row[:, m:2 * m], row[:, -1]
        br2 = np.einsum("kij,kj->ki", b, r2)
        bj = np.einsum("kij,kj->ki", b, self.j2mu)
        btrf = np.einsum("kji,kj->ki", b, rf)
        a = np.empty((k, m + 1, m + 1))
        a[:, :m, :m] = self.j11 - arm[:, :, None] * b * arm[:, None, :]
        a[:, :m, m] = self.j1mu - arm * bj
        a[:, m, :m] = ry - arm * btrf
        a[:, m, m] = rmu - np.einsum("ki,ki->k", rf, bj)
        rhs = np.empty((k, m + 1, 1))
        rhs[:, :m, 0] = r1 - arm * br2
        rhs[:, m, 0] = c - np.einsum("ki,ki->k", rf, br2)
        sol = np.linalg.solve(a, rhs)[..., 0]
        dy, dmu = sol[:, :m], sol[:, m]
        out = np.empty((k, 2 * m + 1))
        out[:, :m] = dy
        out[:, m:2 * m] = br2 - np.einsum("kij,kj->ki", b, arm * dy) - bj * dmu[:, None]
        out[:, -1] = dmu
        return out


@dataclass(frozen=True)
class FieldOperators:
    """Values and derivatives of ``x^m v`` (rows: nodes, columns: half-grid values of ``v``)."""

    w0: np.ndarray
    w1: np.ndarray
    w2: np.ndarray
    w3_edge: np.ndarray
    bilaplacian: np.ndarray  # x² ∇⁴_n (x^m v)


@dataclass(frozen=True)
class ModeOperators:
    """State-independent pieces of the stability matrix of circumferential wave number n.

    The deflection is ``w = x^m v`` with ``m = min(n, 2)``, so the polynomial ``v`` excludes the
    non-smooth ``x^0 cos 2θ``; the stress function is ``Φ = x^m φ`` with ``m = 3`` for n = 1,
    which removes the stress-free gauge ``Φ = x cos θ`` (a linear function, zero stress).
    """

    n: int
    deflection: FieldOperators
    stress: FieldOperators


def _field_operators(size: int, n: int, m: int) -> FieldOperators:
    g = make_radial_grid(size)
    x = g.x
    pv = 1 if (n - m) % 2 == 0 else -1
    pn = 1 if n % 2 == 0 else -1
    d1, d2, d3 = g.d1[pv], g.d2[pv], g.d3[pv]
    xm = x**m
    eye = np.eye(size)
    w0 = np.diag(xm)
    w1 = np.diag(m * x ** (m - 1)) + xm[:, None] * d1
    w2 = np.diag(m * (m - 1) * x ** (m - 2)) + (2 * m * x ** (m - 1))[:, None] * d1 + xm[:, None] * d2
    w3_edge = m * (m - 1) * (m - 2) * eye[0] + 3 * m * (m - 1) * d1[0] + 3 * m * d2[0] + d3[0]
    lap = (x ** (m - 2))[:, None] * ((x**2)[:, None] * d2 + ((2 * m + 1) * x)[:, None] * d1 + (m * m - n * n) * eye)
    outer = (x**2)[:, None] * g.d2[pn] + x[:, None] * g.d1[pn] - n * n * eye
    return FieldOperators(w0=w0, w1=w1, w2=w2, w3_edge=w3_edge, bilaplacian=outer @ lap)


@lru_cache(maxsize=256)
def make_mode_operators(size: int, n: int) -> ModeOperators:
    """Return the operators of wave number ``n ≥ 1`` on a half grid of ``size`` nodes (cached)."""
    return ModeOperators(n=n, deflection=_field_operators(size, n, 1 if n == 1 else 2),
                         stress=_field_operators(size, n, 3 if n == 1 else 2))


def build_mode_matrices(ops: ModeOperators, x: np.ndarray, f: np.ndarray, df: np.ndarray,
                        zeta1: np.ndarray, zeta2: np.ndarray, nu: np.ndarray,
                        clamped: np.ndarray, immovable: np.ndarray) -> np.ndarray:
    """Return the ``(k, 2M, 2M)`` linear stability matrices of wave number ``ops.n``.

    Parameters
    ----------
    x
        Half-grid nodes.
    f, df
        ``(k, M)`` compressive stress-function slope ``f = −Φ₀'`` and its derivative.
    zeta1, zeta2
        ``(k, M)`` slope and curvature of the deformed surface, ``ζ'`` and ``ζ''``.
    nu, clamped, immovable
        ``(k,)`` Poisson's ratio and edge flags.
    """
    n = ops.n
    k, m = f.shape
    wo, so = ops.deflection, ops.stress
    a = np.zeros((k, 2 * m, 2 * m))
    w_b = x[:, None] * wo.w1 - n * n * wo.w0
    s_b = x[:, None] * so.w1 - n * n * so.w0
    # x² × (∇⁴w − [Φ₀, w] − [Φ, ζ]) and x² × (∇⁴Φ + [ζ, w]) at the interior nodes
    a[:, :m, :m] = wo.bilaplacian + df[:, :, None] * w_b + (x * f)[:, :, None] * wo.w2
    a[:, :m, m:] = -(zeta2[:, :, None] * s_b + (x * zeta1)[:, :, None] * so.w2)
    a[:, m:, :m] = zeta2[:, :, None] * w_b + (x * zeta1)[:, :, None] * wo.w2
    a[:, m:, m:] = so.bilaplacian
    # two edge conditions per field replace the collocation rows at the two outer nodes
    a[:, 0, :] = 0.0
    a[:, 1, :] = 0.0
    a[:, 0, :m] = wo.w0[0]
    a[:, 1, :m] = np.where(clamped[:, None], wo.w1[0][None, :], wo.w2[0][None, :] + nu[:, None] * wo.w1[0][None, :])
    a[:, m, :] = 0.0
    a[:, m + 1, :] = 0.0
    f0, f1, f2, f3 = so.w0[0], so.w1[0], so.w2[0], so.w3_edge
    n2 = n * n
    nuc = nu[:, None]
    # immovable: ε_θ = 0 and ∂_r(r ε_θ) − ε_r − ∂_θ γ + ζ' w' = 0 (u_r = u_θ = 0 along the edge)
    e_theta = f2[None, :] - nuc * (f1 - n2 * f0)[None, :]
    de_theta = f3[None, :] - nuc * (f2 - f1 - n2 * f1 + 2 * n2 * f0)[None, :]
    e_r = (f1 - n2 * f0)[None, :] - nuc * f2[None, :]
    shear = 2.0 * (1.0 + nuc) * n2 * (f1 - f0)[None, :]
    a[:, m, m:] = np.where(immovable[:, None], e_theta, f0[None, :])
    a[:, m + 1, m:] = np.where(immovable[:, None], de_theta - e_r - shear, f1[None, :])
    a[:, m + 1, :m] = np.where(immovable[:, None], zeta1[:, :1] * wo.w1[0][None, :], 0.0)
    return a


def compute_mode_determinants(problem: CapPathProblem, z: np.ndarray, idx: np.ndarray,
                              modes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Return ``(sign, log|det|)`` of the stability matrices, shape ``(k, len(modes))``.

    Parameters
    ----------
    z
        ``(k, 2M+1)`` axisymmetric states.
    idx
        ``(k,)`` problem indices of the states.
    modes
        Wave numbers ``n ≥ 1``.
    """
    g = problem.grid
    x = g.x
    lam2 = problem.lam[idx] ** 2
    y, fs, _, p = problem.split(z, idx)
    kap = problem.kappa[idx]
    ybar = y + (kap * p)[:, None] * problem.sigma[None, :]
    dybar = np.einsum("ij,kj->ki", g.d1[-1], y) + (kap * p)[:, None] * problem.dsigma[None, :]
    imp = problem.imperfection[idx]
    dimp = np.einsum("ij,kj->ki", g.d1[-1], imp)
    f = lam2[:, None] * fs
    df = lam2[:, None] * np.einsum("ij,kj->ki", g.d1[-1], fs)
    zeta1 = lam2[:, None] * (-(x[None, :] - imp) + ybar)
    zeta2 = lam2[:, None] * (-(1.0 - dimp) + dybar)
    sign = np.empty((z.shape[0], len(modes)))
    logdet = np.empty_like(sign)
    nu = problem.nu[idx]
    cl = problem.clamped[idx]
    im = problem.immovable[idx]
    for j, n in enumerate(modes):
        ops = make_mode_operators(g.size, int(n))
        a = build_mode_matrices(ops, x, f, df, zeta1, zeta2, nu, cl, im)
        sign[:, j], logdet[:, j] = np.linalg.slogdet(a)
    return sign, logdet
