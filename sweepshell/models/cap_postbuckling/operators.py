"""Residual and analytic Jacobian of the n-fold symmetric Föppl–von Kármán cap (``cap_postbuckling``).

Notation of ``theory.md``: x = r/a, scaled unknowns ``W = ω/λ²`` and ``P = Φ/λ²`` (ω = 2c w/h,
Φ = F/D), ε = 1/λ², the stress-free slope over λ² ``−ŝ = −x + g/λ²`` (sphere minus dimple).
Each field is a cosine series in ``jnθ``, ``j = 0 … K``, with radial coefficients on the half
grid of :mod:`sweepshell.numerics.radial_chebyshev`.

Harmonic 0 is ``shallow_cap``'s axisymmetric problem, unknowns and equations alike: the slopes
``Y = W₀'`` and ``F = −P₀'`` and the once-integrated equations (the point force exact, its
``x log x`` slope ``σ`` subtracted; a mismatch strain through its closed-form stress ``F_p``),
plus the mean radial flux ``X`` of the brackets of the other harmonics::

    −ε x L[Y] + F̄(ŝ − Ȳ) − 2q x² + X(P, W) = 0,      ε x L[F] + ŝȲ − Ȳ²/2 − ½ X(W, W) = 0,
    Ȳ = Y + κPσ,  F̄ = F + e F_p,
    X(A, B) = Σ_{j≥1} ½ [A_j' B_j' − m² (A_j' B_j + A_j B_j')/x + m² A_j B_j/x²],   m = jn.

``X`` is ``x`` times the θ-mean of the radial component of the divergence form of the bracket,
``[A, B] = ∇·(cof(∇²B) ∇A)``, so the θ-mean of ``[A, B]`` is ``(1/x)(X)'`` and the
once-integrated harmonic-0 equations are exact. Harmonics ``m = jn ≥ 2`` keep the collocated
equations (times x²), projected on ``cos(lnθ)`` by the exact midpoint rule (Galerkin in θ)::

    ε x²∇⁴W − x²[P, W + ζ₀/λ²] = 0,      ε x²∇⁴P + ½ x²[W, W + 2ζ₀/λ²] = 0,

in which the axisymmetric state enters with the point force spread over a Gaussian contact
(:func:`~sweepshell.models.cap_postbuckling.fields.contact_slope`): its ``log x`` curvature,
collocated, gives spurious ``cos nθ`` modes (``shallow_cap``'s modes module documents them).
"""

from __future__ import annotations

import numpy as np

from sweepshell.models.cap_postbuckling.bordered import SchurBordered
from sweepshell.models.cap_postbuckling.fields import angular_rule, contact_slope, make_radial_fields
from sweepshell.models.shallow_cap.kernels import eigenstrain_stress, singular_slope
from sweepshell.numerics.radial_chebyshev import build_radial_grid

__all__ = ["HarmonicCapProblem", "Mismatch", "split_quadrature"]

Mismatch = tuple[float, float, bool]  # (direction −1 shrinkage / +1 swelling, region radius over a, annulus)


class HarmonicCapProblem:
    """One cap on the n-fold symmetric subspace: residual, dense analytic Jacobian, apex deflection.

    Satisfies the ``linearize(z, idx)`` protocol of :mod:`sweepshell.numerics.arclength` (rows
    of ``z`` are states of this one cap; ``idx`` is ignored). With ``harmonics`` 0 the problem
    is ``shallow_cap``'s axisymmetric one on the same grid (the same unknowns, load unit and
    residual rows).

    Parameters
    ----------
    lam, nu
        Shell parameter λ and Poisson's ratio.
    clamped, immovable
        Bending and in-plane edge conditions.
    apex
        Load: an apex point force when true, else a uniform pressure (or ``mismatch``).
    amplitude, width
        Apex dimple amplitude over h and width over ℓ = a/λ.
    wave_number, harmonics
        n and K of the subspace ``cos jnθ``, j = 0 … K (any n for K = 0).
    nodes, stretch, centre
        Radial grid (:func:`~sweepshell.numerics.radial_chebyshev.build_radial_grid`).
    contact
        Width (over ℓ) of the Gaussian over which the other harmonics see the apex force.
    mismatch
        ``(direction, radius, annulus)`` of a mismatch-strain load with a sharp edge, as
        ``shallow_cap``'s; None for pressure and apex force.
    """

    def __init__(self, *, lam: float, nu: float, clamped: bool, immovable: bool, apex: bool, amplitude: float,
                 width: float, wave_number: int, harmonics: int, nodes: int, stretch: float,
                 contact: float, centre: float = 0.0, mismatch: Mismatch | None = None) -> None:
        self.lam, self.nu = float(lam), float(nu)
        self.clamped, self.immovable, self.apex = bool(clamped), bool(immovable), bool(apex)
        self.mismatch = mismatch is not None
        self.amplitude, self.width = float(amplitude), float(width)
        self.n, self.k, self.size = int(wave_number), int(harmonics), int(nodes)
        self.grid = build_radial_grid(self.size, float(stretch), float(centre))
        x = self.x = self.grid.x
        self.c = float(np.sqrt(3.0 * (1.0 - self.nu**2)))
        self.eps = 1.0 / self.lam**2
        self.kappa = 2.0 * self.c**2 / np.pi
        self.fw, self.ff = make_radial_fields(self.size, self.n, self.k, float(stretch), float(centre))
        self.theta, self.cos, self.sin, self.proj = angular_rule(self.n, self.k)
        d1 = self.grid.d1[-1]
        self.xl = x[:, None] * self.grid.d2[-1] + d1 - np.diag(1.0 / x)
        # the stress-free slope over λ² (sphere minus dimple, as shallow_cap's ŝ) and curvature
        self._dimple = (4.0 * self.c * float(amplitude) / float(width) ** 2,
                        (self.lam / float(width)) ** 2 if amplitude else 0.0)
        self.shat, self.z0_curv = self.surface(x)
        self.z0_slope = -self.shat
        self.contact_width = float(contact) / self.lam
        self.sigma, self.dsigma = self.force_slope(x)
        edge_slope, edge_curv = self.force_slope(np.ones(1))
        self.sigma_edge = (float(edge_slope[0]), float(edge_curv[0]))
        self.sigma_moments = (0.125, 1.0 / 32.0)  # ∫₀¹ σ, ∫₀¹ σ x² of the point force
        if self.contact_width:
            gx, gw = split_quadrature(0.0, self.contact_width)
            sig = self.force_slope(gx)[0]
            self.sigma_moments = (float(gw @ sig), float(gw @ (sig * gx**2)))
        self.load_scale = 1.0
        if self.apex:
            self.load_scale = 1.0 + self.lam**2 / (4.0 * self.c)
        self.eigen = (np.zeros(self.size), np.zeros(self.size), 0.0)
        if mismatch is not None:
            direction, radius, annulus = mismatch
            self.load_scale = (-1.0 if direction < 0 else 1.0) * (1.0 + 4.0 / self.lam**2)
            f_p, df_p, k = eigenstrain_stress(x, np.array([radius]), np.array([bool(annulus)]),
                                              np.array([self.nu]), np.array([self.immovable]), 0.0)
            self.eigen = (f_p[0], df_p[0], float(k[0]))
        self.block = (self.k + 1) * self.size
        self.unknowns = 2 * self.block
        self._edge_w = self._deflection_edge_rows()
        self._edge_f = self._stress_edge_rows()
        # the stress block ∂R_Φ/∂P is constant and block-diagonal by harmonic: inverted once, it is
        # eliminated from every bordered solve (a Schur complement)
        jac = self.evaluate(np.zeros(self.unknowns + 1))[1]
        nb, m = self.block, self.size
        stress = jac[nb:, nb:2 * nb]
        self.stress_inverse = np.stack([np.linalg.inv(stress[j * m:(j + 1) * m, j * m:(j + 1) * m])
                                        for j in range(self.k + 1)])

    # -- layout and loads --------------------------------------------------------------------
    def surface(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Return ``ŝ`` (minus the stress-free slope over λ²) and the stress-free curvature over λ² at ``x``."""
        amp, s = self._dimple
        gauss = np.exp(-s * x**2)
        return x - amp * x * gauss, -1.0 + amp * gauss * (1.0 - 2.0 * s * x**2)

    def force_slope(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Return the slope per unit κP of the apex force and its derivative at ``x`` (``σ``, ``σ'``).

        ``contact`` 0: the point force, ``σ = −½ x log x`` (``shallow_cap``'s); else the force
        spread over a Gaussian of width ``contact`` ℓ (:func:`~.fields.contact_slope`).
        """
        if self.contact_width == 0.0:
            s, ds, _ = singular_slope(x)
            return s, ds
        return contact_slope(x, self.contact_width)

    def split(self, z: np.ndarray) -> tuple[np.ndarray, np.ndarray, float]:
        """Return ``W`` and ``P`` as ``(K+1, M)`` (harmonic 0: the slopes ``Y``, ``F``) and μ of one state."""
        k1, m = self.k + 1, self.size
        return z[:self.block].reshape(k1, m), z[self.block:self.unknowns].reshape(k1, m), float(z[-1])

    def load(self, mu: np.ndarray | float) -> np.ndarray | float:
        """Return the load of μ: pressure over p_cl, apex force over E h³/R, or mismatch strain over ε_cl."""
        return np.asarray(mu) * self.load_scale if np.ndim(mu) else float(mu) * self.load_scale

    def _loads(self, mu: float) -> tuple[float, float, float]:
        """Return ``(q, P, e)``: pressure, apex force and mismatch strain of μ (two of them zero)."""
        if self.apex:
            return 0.0, mu * self.load_scale, 0.0
        if self.mismatch:
            return 0.0, 0.0, mu * self.load_scale
        return mu, 0.0, 0.0

    def deflection_row(self) -> np.ndarray:
        """Return ``g`` with ``δ/h = g @ z``: ``(λ²/2c)(∫₀¹ Y dx + κP/8)`` (shallow_cap's apex deflection)."""
        row = np.zeros(self.unknowns + 1)
        scale = self.lam**2 / (2.0 * self.c)
        row[:self.size] = scale * self.grid.integral[-1]
        if self.apex:
            row[-1] = scale * self.kappa * self.load_scale * self.sigma_moments[0]
        return row

    def apex_deflection(self, z: np.ndarray) -> np.ndarray:
        """Return δ/h, positive inwards, of states ``z`` ``(…, N+1)``."""
        return z @ self.deflection_row()

    def volume_change(self, z: np.ndarray) -> np.ndarray:
        """Return the swept volume over the cap volume π a² H/2, ``4 ∫₀¹ Ȳ x² dx`` (positive inwards)."""
        force = z[..., -1] * self.load_scale if self.apex else 0.0
        return 4.0 * (z[..., :self.size] @ self.grid.moment2[-1] + self.kappa * force * self.sigma_moments[1])

    def conjugate(self, z: np.ndarray) -> np.ndarray:
        """Return the displacement work-conjugate to the load: δ/h (apex force) or the swept volume."""
        return self.apex_deflection(z) if self.apex else self.volume_change(z)

    # -- edge rows ---------------------------------------------------------------------------
    def _deflection_edge_rows(self) -> np.ndarray:
        fw = self.fw
        second = fw.slope[:, 0] if self.clamped else fw.curvature[:, 0] + self.nu * fw.slope[:, 0]
        return np.stack([fw.value[:, 0], second], axis=1)  # (K+1, 2, M); harmonic 0 has its own

    def _stress_edge_rows(self) -> np.ndarray:
        ff, nu = self.ff, self.nu
        rows = np.zeros((self.k + 1, 2, self.size))
        for j in range(1, self.k + 1):
            m2 = float((j * self.n) ** 2)
            f0, f1, f2, f3 = ff.value[j, 0], ff.slope[j, 0], ff.curvature[j, 0], ff.third[j]
            if not self.immovable:
                rows[j] = f0, f1  # N_r = N_rθ = 0 for m ≥ 2
            else:
                e_theta = f2 - nu * (f1 - m2 * f0)
                de_theta = f3 - nu * (f2 - f1 - m2 * f1 + 2 * m2 * f0)
                e_r = (f1 - m2 * f0) - nu * f2
                shear = 2.0 * (1.0 + nu) * m2 * (f1 - f0)
                rows[j] = e_theta, de_theta - e_r - shear
        return rows

    # -- residual and Jacobian -----------------------------------------------------------------
    def evaluate(self, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Return the residual ``(N,)`` and the Jacobian ``(N, N+1)`` of one state."""
        w, p, mu = self.split(z)
        rw, rf, jac = self._harmonic_rows(w, p, mu)
        self._axisymmetric_rows(w, p, mu, rw, rf, jac)
        self._edge_rows(w, p, rw, rf, jac)
        return np.concatenate([rw.ravel(), rf.ravel()]), jac

    def _phys(self, field, v: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:  # type: ignore[no-untyped-def]
        r1 = np.einsum("jab,jb->ja", field.curvature, v)
        r2 = np.einsum("jab,jb->ja", field.p2, v)
        r3 = np.einsum("jab,jb->ja", field.p3, v)
        return self.cos @ r1, self.cos @ r2, self.sin @ r3

    def _bracket_jacobian(self, field, c1: np.ndarray, c2: np.ndarray,  # type: ignore[no-untyped-def]
                          c3: np.ndarray) -> np.ndarray:
        """Return ``∂/∂v Proj[P1(v) c1 + P2(v) c2 + P3(v) c3]`` as ``(N_f, N_f)``."""
        k1, m = self.k + 1, self.size
        out = np.zeros((k1, m, k1, m))
        for coef, ang, rad in ((c1, self.cos, field.curvature), (c2, self.cos, field.p2), (c3, self.sin, field.p3)):
            g = np.einsum("lq,qi,qj->lji", self.proj, coef, ang)
            out += np.einsum("lji,jia->lija", g, rad)
        return out.reshape(k1 * m, k1 * m)

    def _harmonic_rows(self, w: np.ndarray, p: np.ndarray, mu: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Return the collocated bracket residuals and Jacobian (rows of harmonics ≥ 1 are final)."""
        k1, m, nb, eps, x = self.k + 1, self.size, self.block, self.eps, self.x
        _, force, e = self._loads(mu)
        f_p, df_p, _ = self.eigen
        # the axisymmetric parts not in the unknowns: the contact-spread point-force slope, the eigenstress
        da1, da2 = self.kappa * self.dsigma, self.kappa * x * self.sigma
        db1, db2 = -df_p, -x * f_p
        dscale = self.load_scale
        a1, a2, a3 = self._phys(self.fw, w)
        b1, b2, b3 = self._phys(self.ff, p)
        a1, a2 = a1 + force * da1, a2 + force * da2
        b1, b2 = b1 + e * db1, b2 + e * db2
        # the deformed surface over λ², ζ̃ = W + ζ₀/λ², and the factors of W + 2ζ₀/λ²
        z1, z2, z3 = a1 + self.z0_curv, a2 + x * self.z0_slope, a3
        s1, s2 = a1 + 2.0 * self.z0_curv, a2 + 2.0 * x * self.z0_slope
        pz = self.proj @ (b1 * z2 + z1 * b2 - 2.0 * b3 * z3)
        ww = self.proj @ (a1 * s2 + s1 * a2 - 2.0 * a3 * a3)
        rw = eps * np.einsum("jab,jb->ja", self.fw.bilaplacian, w) - pz
        rf = eps * np.einsum("jab,jb->ja", self.ff.bilaplacian, p) + 0.5 * ww
        jac = np.zeros((2 * nb, 2 * nb + 1))
        jac[:nb, :nb] = eps * _block_diag(self.fw.bilaplacian) - self._bracket_jacobian(self.fw, b2, b1, -2.0 * b3)
        jac[:nb, nb:2 * nb] = -self._bracket_jacobian(self.ff, z2, z1, -2.0 * z3)
        jac[nb:, :nb] = self._bracket_jacobian(self.fw, z2, z1, -2.0 * z3)
        jac[nb:, nb:2 * nb] = eps * _block_diag(self.ff.bilaplacian)
        if self.apex:
            jac[:nb, -1] = -(self.proj @ (b1 * da2 + da1 * b2)).ravel() * dscale
            jac[nb:, -1] = (self.proj @ (da1 * z2 + da2 * z1)).ravel() * dscale
        elif self.mismatch:
            jac[:nb, -1] = -(self.proj @ (db1 * z2 + z1 * db2)).ravel() * dscale
        del k1, m
        return rw, rf, jac

    def _mean_flux(self, w: np.ndarray, p: np.ndarray) -> tuple[np.ndarray, ...]:
        """Return ``X(P, W)``, ``X(W, W)`` and their Jacobians ``(M, N_f)`` over the W and P unknowns."""
        m, x = self.size, self.x
        ix = 1.0 / x
        xpw, xww = np.zeros(m), np.zeros(m)
        dpw_w, dpw_p, dww_w = (np.zeros((m, self.block)) for _ in range(3))
        fw, ff = self.fw, self.ff
        for j in range(1, self.k + 1):
            m2 = float((j * self.n) ** 2)
            wv, ws = fw.value[j] @ w[j], fw.slope[j] @ w[j]
            pv, ps = ff.value[j] @ p[j], ff.slope[j] @ p[j]
            xpw += 0.5 * (ps * ws - m2 * ix * (ps * wv + pv * ws) + m2 * ix**2 * pv * wv)
            xww += 0.5 * (ws * ws - 2.0 * m2 * ix * ws * wv + m2 * ix**2 * wv * wv)
            cols = slice(j * m, (j + 1) * m)
            dpw_w[:, cols] = 0.5 * ((ps - m2 * ix * pv)[:, None] * fw.slope[j]
                                    + (m2 * ix**2 * pv - m2 * ix * ps)[:, None] * fw.value[j])
            dpw_p[:, cols] = 0.5 * ((ws - m2 * ix * wv)[:, None] * ff.slope[j]
                                    + (m2 * ix**2 * wv - m2 * ix * ws)[:, None] * ff.value[j])
            dww_w[:, cols] = ((ws - m2 * ix * wv)[:, None] * fw.slope[j]
                              + (m2 * ix**2 * wv - m2 * ix * ws)[:, None] * fw.value[j])
        return xpw, xww, dpw_w, dpw_p, dww_w

    def _axisymmetric_rows(self, w: np.ndarray, p: np.ndarray, mu: float, rw: np.ndarray, rf: np.ndarray,
                           jac: np.ndarray) -> None:
        """Fill harmonic 0's rows: shallow_cap's integrated equations plus the mean fluxes ``X``."""
        m, nb, eps, x = self.size, self.block, self.eps, self.x
        q, force, e = self._loads(mu)
        f_p, _, k_edge = self.eigen
        y, f = w[0], p[0]
        ybar = y + self.kappa * force * self.sigma
        ftot = f + e * f_p
        arm = self.shat - ybar
        xpw, xww, dpw_w, dpw_p, dww_w = self._mean_flux(w, p)
        rw[0] = -eps * (self.xl @ y) + ftot * arm - 2.0 * q * x**2 + xpw
        rf[0] = eps * (self.xl @ f) + self.shat * ybar - 0.5 * ybar**2 - 0.5 * xww
        jac[:m] = 0.0
        jac[nb:nb + m] = 0.0
        jac[:m, :nb] = dpw_w
        jac[:m, nb:2 * nb] = dpw_p
        jac[:m, :m] += -eps * self.xl - np.diag(ftot)
        jac[:m, nb:nb + m] += np.diag(arm)
        jac[nb:nb + m, :nb] = -0.5 * dww_w
        jac[nb:nb + m, :m] += np.diag(arm)
        jac[nb:nb + m, nb:nb + m] = eps * self.xl
        dscale = self.load_scale
        if self.apex:
            jac[:m, -1] = -ftot * self.sigma * self.kappa * dscale
            jac[nb:nb + m, -1] = arm * self.sigma * self.kappa * dscale
        elif self.mismatch:
            jac[:m, -1] = dscale * f_p * arm
        else:
            jac[:m, -1] = -2.0 * x**2
        # the edge rows (shallow_cap's): clamped Y = 0 or pinned M_r = 0; immovable u_r = 0 or sliding N_r = 0
        d1 = self.grid.d1[-1][0]
        jac[0] = 0.0
        jac[nb] = 0.0
        if self.clamped:
            rw[0, 0] = y[0]
            jac[0, 0] = 1.0
        else:
            # M_r ∝ Ȳ' + νȲ at x = 1 (the point force: σ(1) = 0, σ'(1) = −½)
            edge_force = self.sigma_edge[1] + self.nu * self.sigma_edge[0]
            rw[0, 0] = d1 @ y + self.nu * y[0] + self.kappa * force * edge_force
            jac[0, :m] = d1
            jac[0, 0] += self.nu
            jac[0, -1] = self.kappa * dscale * edge_force if self.apex else 0.0
        edge = d1 - self.nu * np.eye(1, m)[0] if self.immovable else np.eye(1, m)[0]
        rf[0, 0] = edge @ f - e * k_edge
        jac[nb, nb:nb + m] = edge
        jac[nb, -1] = -dscale * k_edge if self.mismatch else 0.0

    def _edge_rows(self, w: np.ndarray, p: np.ndarray, rw: np.ndarray, rf: np.ndarray, jac: np.ndarray) -> None:
        """Replace the equations of harmonics ≥ 1 at the two outermost nodes by their edge conditions."""
        k1, m, nb, eps = self.k + 1, self.size, self.block, self.eps
        ew, ef = self._edge_w, self._edge_f
        for j in range(1, k1):
            for r in (0, 1):
                row = j * m + r
                rw[j, r] = ew[j, r] @ w[j]
                jac[row] = 0.0
                jac[row, j * m:(j + 1) * m] = ew[j, r]
                rf[j, r] = ef[j, r] @ p[j]
                jac[nb + row] = 0.0
                jac[nb + row, nb + j * m:nb + (j + 1) * m] = ef[j, r]
        if self.immovable and self.k > 0 and not self.clamped:
            # ½ W'(W' + 2ζ₀'/λ²) at the edge in the u_θ = 0 rows (zero at a clamped edge, W' = 0)
            slope = self.cos @ np.einsum("ja,ja->j", self.fw.slope[:, 0], w)  # (Q,)
            total = slope + self.z0_slope[0]
            nl = self.proj @ (0.5 * slope * (slope + 2.0 * self.z0_slope[0]))
            dnl = np.einsum("lq,q,qj->lj", self.proj, total, self.cos)
            for j in range(1, k1):
                rf[j, 1] = eps * rf[j, 1] + nl[j]
                row = nb + j * m + 1
                jac[row, nb:2 * nb] *= eps
                for i in range(k1):
                    jac[row, i * m:(i + 1) * m] = dnl[j, i] * self.fw.slope[i, 0]

    def linearize(self, z: np.ndarray, idx: np.ndarray) -> tuple[np.ndarray, SchurBordered]:
        """Residuals ``(k, N)`` and bordered solver of states ``z`` ``(k, N+1)`` (arclength protocol)."""
        res, jacs = [], []
        for row in z:
            r, j = self.evaluate(row)
            res.append(r)
            jacs.append(j)
        return np.array(res), SchurBordered(np.array(jacs), self.stress_inverse)

    def orientation(self, z: np.ndarray, row: np.ndarray, idx: np.ndarray) -> np.ndarray:
        """Sign of ``det [∂R/∂z; row]`` of states ``z`` up to this problem's constant sign (arclength protocol)."""
        _, lin = self.linearize(z, idx)
        return lin.orientation(row)


def split_quadrature(start: float, width: float) -> tuple[np.ndarray, np.ndarray]:
    """Return Gauss–Legendre points and weights on [``start``, 1], split at 12·``width`` (a contact of that width)."""
    nodes, weights = np.polynomial.legendre.leggauss(64)
    cut = min(max(12.0 * width, 0.05), 0.5)
    parts = [(start, max(cut, start)), (max(cut, start), 1.0)]
    xs = np.concatenate([lo + 0.5 * (hi - lo) * (nodes + 1.0) for lo, hi in parts])
    ws = np.concatenate([0.5 * (hi - lo) * weights for lo, hi in parts])
    return xs, ws


def _block_diag(blocks: np.ndarray) -> np.ndarray:
    k1, m, _ = blocks.shape
    out = np.zeros((k1 * m, k1 * m))
    for j in range(k1):
        out[j * m:(j + 1) * m, j * m:(j + 1) * m] = blocks[j]
    return out
