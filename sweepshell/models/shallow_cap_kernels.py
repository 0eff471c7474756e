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

import numpy as np

from sweepshell.numerics.radial_chebyshev import RadialGrid

__all__ = [
    "CapLinearization",
    "CapPathProblem",
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
        """Solve ``[J; row] d = [r; c]`` for ``d = (dY, dF, dμ)``.

        ``r`` is ``(k, 2M)`` and ``c`` ``(k,)``, or ``(k, 2M, p)`` and ``(k, p)`` for ``p``
        right-hand sides sharing one factorisation (then ``d`` is ``(k, 2M+1, p)``).
        """
        single = r.ndim == 2
        if single:
            r = r[:, :, None]
            c = c[:, None]
        k, m = self.arm.shape
        arm, b = self.arm, self.b
        r1, r2 = r[:, :m], r[:, m:]
        ry, rf, rmu = row[:, :m], row[:, m:2 * m], row[:, -1]
        br2 = b @ r2
        bj = np.einsum("kij,kj->ki", b, self.j2mu)
        btrf = np.einsum("kji,kj->ki", b, rf)
        a = np.empty((k, m + 1, m + 1))
        a[:, :m, :m] = self.j11 - arm[:, :, None] * b * arm[:, None, :]
        a[:, :m, m] = self.j1mu - arm * bj
        a[:, m, :m] = ry - arm * btrf
        a[:, m, m] = rmu - np.einsum("ki,ki->k", rf, bj)
        rhs = np.empty((k, m + 1, r.shape[2]))
        rhs[:, :m] = r1 - arm[:, :, None] * br2
        rhs[:, m] = c - np.einsum("ki,kip->kp", rf, br2)
        sol = np.linalg.solve(a, rhs)
        dy, dmu = sol[:, :m], sol[:, m]
        out = np.empty((k, 2 * m + 1, r.shape[2]))
        out[:, :m] = dy
        out[:, m:2 * m] = br2 - b @ (arm[:, :, None] * dy) - bj[:, :, None] * dmu[:, None, :]
        out[:, -1] = dmu
        return out[:, :, 0] if single else out
