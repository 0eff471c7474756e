"""Discrete operators of the shallow-cap model: axisymmetric residual and stability matrices.

Notation of :mod:`sweepshell.models.shallow_cap.model` (read its docstring first): ``x = r/a``,
``y = ω'`` the deflection slope and ``f = −Φ'`` the compressive stress-function slope, both
stored divided by λ² (``Y = y/λ²``, ``F = f/λ²``); ``ŝ(x) = x − g(x)/λ²`` is the stress-free
slope (sphere minus dimple) over λ². Equations (integrated once, collocated at the interior
half-grid nodes, multiplied by ``1/λ⁴``)::

    −ε x L[Y] + (F + e F_p)(ŝ − Ȳ) − 2 q x² = 0,      ε x L[F] + ŝ Ȳ − Ȳ²/2 = 0,
    L[u] = u'' + u'/x − u/x²,   ε = 1/λ²,   Ȳ = Y + κ P σ(x),

with the apex-force singularity ``σ = −½ x log x`` (``x L[σ] = −1``) removed analytically,
``κ = 2c²/π`` and ``P = F_apex R/(E h³)``.

Mismatch strain: an isotropic eigenstrain ``ε* = e ε_cl χ(x)`` (``ε_cl = 2h/(R c)``, ``χ`` the
strained disc ``x < ρ`` or annulus ``ρ < x < 1``, its edge sharp or smoothed over a width ``w``) adds
``−4 e x χ'`` to the compatibility equation. Its particular solution ``F_p``
(``(x F_p)' = 4 x χ``, in closed form) is carried analytically, so only the edge row of the
compatibility equation changes (:func:`eigenstrain_stress`).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from sweepshell.numerics.radial_chebyshev import RadialGrid

__all__ = [
    "CapLinearization",
    "CapPathProblem",
    "eigenstrain_stress",
    "singular_slope",
]


def singular_slope(x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return ``σ = −½ x log x`` and its first two derivatives at ``x > 0``."""
    lg = np.log(x)
    return -0.5 * x * lg, -0.5 * (lg + 1.0), -0.5 / x


def _weighted_step_integral(x: np.ndarray, rho: np.ndarray, w: float) -> np.ndarray:
    """Return ``∫₀ˣ s χ(s) ds`` for ``χ(s) = ½[erf((s+ρ)/w) − erf((s−ρ)/w)]`` (closed form)."""

    from scipy import special  # only smoothed mismatch edges need erf: not imported on every model load

    def antiderivative(s: np.ndarray, shift: np.ndarray) -> np.ndarray:
        # ∫ s erf((s + shift)/w) ds with u = (s + shift)/w
        u = (s + shift) / w
        erf, gauss = special.erf(u), np.exp(-(u**2)) / np.sqrt(np.pi)
        return w**2 * ((0.5 * u**2 - 0.25) * erf + 0.5 * u * gauss) - shift * w * (u * erf + gauss)

    zero = np.zeros_like(x)
    return 0.5 * (antiderivative(x, rho) - antiderivative(zero, rho) - antiderivative(x, -rho)
                  + antiderivative(zero, -rho))


_ON_EDGE = 1e-12  # relative distance at which a node counts as lying on the region's edge


def eigenstrain_stress(x: np.ndarray, rho: np.ndarray, annulus: np.ndarray, nu: np.ndarray,
                       immovable: np.ndarray, width: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return the particular stress slope of a unit mismatch strain and its edge constant.

    The strained disc is ``χ(x) = ½[erf((x+ρ)/w) − erf((x−ρ)/w)]``: the indicator of ``|x| < ρ``
    smoothed by a Gaussian of width ``w`` (even in x, so the parity grid keeps it exact), or for
    ``w = 0`` the sharp indicator (½ at a node on ``x = ρ``); the annulus is ``1 − χ``; ``ρ = 1``
    (disc) is the whole cap with no step. ``F_p`` solves ``(x F_p)' = 4 x χ``, regular at 0: for
    a sharp disc ``2x`` inside and ``2ρ²/x`` outside (the plane-stress inclusion in an infinite
    sheet, ``N = −E h ε*/2`` inside), continuous with a slope jump from 2 to −2 at ρ. The edge row of the
    smooth remainder ``F`` becomes ``F'(1) − νF(1) = e·k`` (immovable: ``u_r = 0``, with the
    eigenstrain at the edge) or ``F(1) = e·k`` (sliding: ``N_r = 0``).

    Parameters
    ----------
    x
        ``(M,)`` nodes (``x = r/a``).
    rho, annulus, nu, immovable
        ``(n,)`` region radius over ``a``, whether the region is the annulus ``ρ < x < 1``,
        Poisson's ratio and the in-plane edge condition.
    width
        Smoothing width ``w`` of the region's edge, over ``a`` (0: a sharp edge).

    Returns
    -------
    f_p, df_p, k
        ``(n, M)`` ``F_p`` and ``F_p'`` at the nodes and the ``(n,)`` edge constant ``k``.
    """
    pts = np.concatenate([x, [1.0]])[None, :]
    r = rho[:, None]
    whole = r >= 1.0
    if width > 0.0:
        from scipy import special  # smoothed edges only: not imported on every model load

        chi = np.where(whole, 1.0, 0.5 * (special.erf((pts + r) / width) - special.erf((pts - r) / width)))
        f_disc = np.where(whole, 2.0 * pts, 4.0 * _weighted_step_integral(pts, r, width) / pts)
    else:
        # sharp step; at a node on the edge χ = ½ gives F_p' the mean of its two one-sided values
        # (0 for the disc), which makes the collocated jump second-order accurate (first order
        # with either one-sided value)
        on_edge = np.abs(pts - r) <= _ON_EDGE * r
        chi = np.where(whole, 1.0, np.where(on_edge, 0.5, np.where(pts < r, 1.0, 0.0)))
        f_disc = np.where(whole | (pts < r), 2.0 * pts, 2.0 * r**2 / pts)
    df_disc = 4.0 * chi - f_disc / pts
    ann = annulus[:, None]
    f_p = np.where(ann, 2.0 * pts - f_disc, f_disc)
    df_p = np.where(ann, 2.0 - df_disc, df_disc)
    chi_edge = np.where(annulus, 1.0 - chi[:, -1], chi[:, -1])
    k = np.where(immovable, 4.0 * chi_edge - (df_p[:, -1] - nu * f_p[:, -1]), -f_p[:, -1])
    return f_p[:, :-1], df_p[:, :-1], k


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
        Load unit of ``μ``: ``P = force_scale·μ`` (apex force), ``e = force_scale·μ`` (mismatch
        strain over ε_cl = 2h/(R c), signed: negative for shrinkage), 1 for pressure (``μ = q``).
    mismatch
        Bool: the load is a mismatch strain (then ``eigen_stress`` etc. are used).
    eigen_stress, eigen_stress_slope, eigen_edge
        ``(n, M)``, ``(n, M)``, ``(n,)``: :func:`eigenstrain_stress` of each problem (zeros when
        not given).
    """

    grid: RadialGrid
    lam: np.ndarray
    nu: np.ndarray
    clamped: np.ndarray
    immovable: np.ndarray
    apex: np.ndarray
    imperfection: np.ndarray
    force_scale: np.ndarray
    mismatch: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=bool))
    eigen_stress: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))
    eigen_stress_slope: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))
    eigen_edge: np.ndarray = field(default_factory=lambda: np.zeros(0))

    def __post_init__(self) -> None:
        g = self.grid
        x = g.x
        n = self.lam.shape[0]
        if self.mismatch.shape[0] != n:
            self.mismatch = np.zeros(n, dtype=bool)
        if self.eigen_stress.shape[0] != n or self.eigen_edge.shape[0] != n:
            self.eigen_stress = np.zeros((n, g.size))
            self.eigen_stress_slope = np.zeros((n, g.size))
            self.eigen_edge = np.zeros(n)
        self.size = g.size
        self.xl = x[:, None] * g.d2[-1] + g.d1[-1] - np.diag(1.0 / x)
        if g.split > 0.0 and g.jumps is not None:
            # two-domain grid: the row at the shared node ρ is the weighted mean of the one-sided
            # collocations plus the jump of u' (see sweepshell.numerics.radial_two_domain)
            self.xl[g.interface] += g.flux_weight * g.jumps[-1][0]
        self.sigma, self.dsigma, _ = singular_slope(x)
        c = np.sqrt(3.0 * (1.0 - self.nu**2))
        self.kappa = 2.0 * c**2 / np.pi
        # the stretching block εA with its edge row depends on the point only: invert once. It is
        # diag(1, ε, …, ε)·S with S (edge row, then the rows of x L) set by (ν, in-plane edge), so
        # S⁻¹ is computed once per such pair and its columns 1… scaled by 1/ε = λ²
        m = g.size
        d1 = g.d1[-1][0]
        keys = np.stack([self.nu, self.immovable.astype(float)], axis=1)
        pairs, which = np.unique(keys, axis=0, return_inverse=True)
        s = np.repeat(self.xl[None], pairs.shape[0], axis=0)
        s[:, 0, :] = np.where(pairs[:, 1:2] != 0.0, d1[None, :] - pairs[:, :1] * np.eye(1, m), np.eye(1, m))
        scale = np.repeat(self.lam[:, None] ** 2, m, axis=1)
        scale[:, 0] = 1.0
        self.stretch_inverse = np.linalg.inv(s)[which.reshape(-1)] * scale[:, None, :]

    @property
    def unknowns(self) -> int:
        return 2 * self.size

    def split(self, z: np.ndarray, idx: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Return ``Y, F, q, P`` (pressure in p_cl, apex force in E h³/R) of states ``z``."""
        m = self.size
        mu = z[:, -1]
        apex = self.apex[idx]
        load = apex | self.mismatch[idx]
        return z[:, :m], z[:, m:2 * m], np.where(load, 0.0, mu), np.where(apex, mu * self.force_scale[idx], 0.0)

    def mismatch_amplitude(self, z: np.ndarray, idx: np.ndarray) -> np.ndarray:
        """Return ``e``, the mismatch strain over ε_cl = 2h/(R c) (0 unless the load is a mismatch)."""
        return np.where(self.mismatch[idx], z[:, -1] * self.force_scale[idx], 0.0)

    def total_stress(self, z: np.ndarray, idx: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Return the whole stress-function slope ``F + e F_p`` and the eigenstrain part's slope ``e F_p'``."""
        m = self.size
        e = self.mismatch_amplitude(z, idx)[:, None]
        return z[:, m:2 * m] + e * self.eigen_stress[idx], e * self.eigen_stress_slope[idx]

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
        ftot, _ = self.total_stress(z, idx)
        e = self.mismatch_amplitude(z, idx)
        eigen = self.mismatch[idx]
        eigen_edge = self.eigen_edge[idx]
        eps = 1.0 / self.lam[idx] ** 2
        kap = self.kappa[idx]
        nu = self.nu[idx]
        apex = self.apex[idx]
        ybar = y + (kap * p)[:, None] * self.sigma[None, :]
        shat = x[None, :] - self.imperfection[idx]
        arm = shat - ybar
        r = np.empty((k, 2 * m))
        r[:, :m] = -eps[:, None] * np.einsum("ij,kj->ki", self.xl, y) + ftot * arm - 2.0 * q[:, None] * x[None, :] ** 2
        r[:, m:] = eps[:, None] * np.einsum("ij,kj->ki", self.xl, f) + shat * ybar - 0.5 * ybar**2
        d1 = self.grid.d1[-1][0]
        cl = self.clamped[idx]
        r[:, 0] = np.where(cl, y[:, 0], np.einsum("j,kj->k", d1, y) + nu * y[:, 0] - 0.5 * kap * p)
        im = self.immovable[idx]
        r[:, m] = np.where(im, np.einsum("j,kj->k", d1, f) - nu * f[:, 0], f[:, 0]) - e * eigen_edge
        # Jacobian blocks: J11 dense, J12 = J21 = diag(arm) (zero on the edge rows), J22 = εA fixed
        j11 = -eps[:, None, None] * self.xl[None]
        diag = np.arange(m)
        j11[:, diag, diag] -= ftot
        j11[:, 0, :] = np.where(cl[:, None], np.eye(1, m)[0][None, :], d1[None, :] + nu[:, None] * np.eye(1, m))
        arm0 = arm.copy()
        arm0[:, 0] = 0.0
        dp = np.where(apex, kap * self.force_scale[idx], 0.0)
        de = np.where(eigen, self.force_scale[idx], 0.0)
        j1mu = np.where(apex[:, None], -f * self.sigma[None, :] * dp[:, None],
                        np.where(eigen[:, None], de[:, None] * self.eigen_stress[idx] * arm, -2.0 * x[None, :] ** 2))
        j1mu[:, 0] = np.where(cl, 0.0, -0.5 * dp)
        j2mu = arm0 * self.sigma[None, :] * dp[:, None]
        j2mu[:, 0] = -de * eigen_edge
        return r, CapLinearization(j11=j11, arm=arm0, j1mu=j1mu, j2mu=j2mu, b=self.stretch_inverse[idx])

    def orientation(self, z: np.ndarray, row: np.ndarray, idx: np.ndarray) -> np.ndarray:
        """Return the sign of ``det [∂R/∂z; row]`` at states ``z`` (up to a per-cap constant sign)."""
        return self.linearize(z, idx)[1].orientation(row)

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
        rf = row[:, m:2 * m]
        br2 = b @ r2
        a, bj = self._reduced(row)
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

    def orientation(self, row: np.ndarray) -> np.ndarray:
        """Return the sign of ``det [J; row]`` over that of the fixed stretching block, ``(k,)``.

        It is the sign of the reduced ``(M+1)``-square matrix (the stretching block's own
        determinant does not change along a path); see ``compiled_newton.correct_one``.
        """
        return np.sign(np.linalg.det(self._reduced(row)[0]))

    def _reduced(self, row: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Return the bordered matrix with the stretching block eliminated, and ``b·j2mu``."""
        k, m = self.arm.shape
        arm, b = self.arm, self.b
        ry, rf, rmu = row[:, :m], row[:, m:2 * m], row[:, -1]
        bj = np.einsum("kij,kj->ki", b, self.j2mu)
        btrf = np.einsum("kji,kj->ki", b, rf)
        a = np.empty((k, m + 1, m + 1))
        a[:, :m, :m] = self.j11 - arm[:, :, None] * b * arm[:, None, :]
        a[:, :m, m] = self.j1mu - arm * bj
        a[:, m, :m] = ry - arm * btrf
        a[:, m, m] = rmu - np.einsum("ki,ki->k", rf, bj)
        return a, bj
