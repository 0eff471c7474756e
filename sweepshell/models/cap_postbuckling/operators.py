"""Residual and analytic Jacobian of the n-fold symmetric Föppl–von Kármán cap (``cap_postbuckling``).

Notation of ``theory.md``: x = r/a, scaled unknowns ``W = ω/λ²`` and ``P = Φ/λ²`` (ω = 2c w/h,
Φ = F/D), ε = 1/λ², the stress-free surface ``ζ₀/λ² = −x²/2 − (2c δ_d/λ²) exp(−(λx/b)²)``.
Each field is a cosine series in ``jnθ``, ``j = 0 … K``, with radial coefficients on the half
grid of :mod:`sweepshell.numerics.radial_chebyshev`. Harmonic ``m = jn ≥ 2`` uses the
substitution ``u = x² v`` of :func:`sweepshell.models.shallow_cap.modes.build_mode_operators`
(which excludes the non-smooth ``x⁰ cos 2θ``); harmonic 0 uses the even polynomial itself.
The equations, multiplied by x², are collocated in ``x`` and projected on ``cos(lnθ)`` by a
midpoint rule with ``Q > 3K/2`` points, which integrates the quadratic brackets exactly
(Galerkin in θ, no aliasing)::

    ε x²∇⁴W − x²[P, W + ζ₀/λ²] + x² q̃ = 0,      ε x²∇⁴P + ½ x²[W, W + 2ζ₀/λ²] = 0,

    x²[A, B] = A_rr (x B_r + B_θθ) + B_rr (x A_r + A_θθ) − 2 (A_rθ − A_θ/x)(B_rθ − B_θ/x).

Two edge rows per harmonic and field replace the equations at the two outermost nodes.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from sweepshell.models.shallow_cap.modes import build_mode_operators
from sweepshell.numerics.radial_chebyshev import build_interpolation_matrix, build_radial_grid

__all__ = ["HarmonicCapProblem", "RadialField", "make_radial_fields"]


@dataclass(frozen=True)
class RadialField:
    """Radial operators of one harmonic ``m`` of one field, stacked over harmonics ``(K+1, M, M)``.

    ``value``, ``slope``, ``curvature``: the field and its first two x-derivatives from the
    unknowns; ``bilaplacian``: ``x²∇⁴_m``; ``p2`` = ``x u' − m² u`` and ``p3`` = ``−m (u' − u/x)``,
    the radial factors of ``x A_r + A_θθ`` (cosine) and ``A_rθ − A_θ/x`` (sine); ``third``: the
    third derivative's edge row ``(K+1, M)``.
    """

    value: np.ndarray
    slope: np.ndarray
    curvature: np.ndarray
    bilaplacian: np.ndarray
    p2: np.ndarray
    p3: np.ndarray
    third: np.ndarray


def _axisymmetric(size: int, stretch: float) -> tuple[np.ndarray, ...]:
    g = build_radial_grid(size, stretch)
    x = g.x
    eye = np.eye(size)
    d1, d2, d3 = g.d1[1], g.d2[1], g.d3[1]
    outer = (x**2)[:, None] * d2 + x[:, None] * d1
    lap = d2 + (1.0 / x)[:, None] * d1
    return eye, d1, d2, outer @ lap, d3[0]


@lru_cache(maxsize=64)
def make_radial_fields(size: int, wave_number: int, harmonics: int, stretch: float) -> tuple[RadialField, RadialField]:
    """Return the deflection and stress operators of harmonics ``0, n, …, Kn`` (cached)."""
    x = build_radial_grid(size, stretch).x
    parts: dict[str, list[list[np.ndarray]]] = {"w": [[] for _ in range(7)], "f": [[] for _ in range(7)]}
    for j in range(harmonics + 1):
        m = j * wave_number
        if m == 0:
            w0, w1, w2, bil, w3 = _axisymmetric(size, stretch)
            fields = {"w": (w0, w1, w2, bil, w3), "f": (w0, w1, w2, bil, w3)}
        else:
            ops = build_mode_operators(size, m, stretch)
            fields = {key: (fo.w0, fo.w1, fo.w2, fo.bilaplacian, fo.w3_edge)
                      for key, fo in (("w", ops.deflection), ("f", ops.stress))}
        for key, (w0, w1, w2, bil, w3) in fields.items():
            p2 = x[:, None] * w1 - m * m * w0
            p3 = -m * (w1 - w0 / x[:, None])
            for slot, arr in enumerate((w0, w1, w2, bil, p2, p3, w3)):
                parts[key][slot].append(arr)
    out = []
    for key in ("w", "f"):
        arrs = [np.stack(a) for a in parts[key]]
        for a in arrs:
            a.setflags(write=False)
        out.append(RadialField(*arrs))
    return out[0], out[1]


@lru_cache(maxsize=64)
def _angular(wave_number: int, harmonics: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Return ``(θ_q, cos, sin, projection)``: midpoints on [0, π/n] and the synthesis/projection matrices."""
    q = harmonics * 3 // 2 + 1
    n = max(wave_number, 1)
    theta = (np.arange(q) + 0.5) * np.pi / (n * q)
    m = n * np.arange(harmonics + 1)
    cos = np.cos(np.outer(theta, m))
    sin = np.sin(np.outer(theta, m))
    proj = (np.where(m == 0, 1.0, 2.0) / q)[:, None] * cos.T
    return theta, cos, sin, proj


class HarmonicCapProblem:
    """One cap on the n-fold symmetric subspace: residual, dense analytic Jacobian, apex deflection.

    Satisfies the ``linearize(z, idx)`` protocol of :mod:`sweepshell.numerics.arclength` (rows
    of ``z`` are states of this one cap; ``idx`` is ignored).

    Parameters
    ----------
    lam, nu
        Shell parameter λ and Poisson's ratio.
    clamped, immovable
        Bending and in-plane edge conditions.
    apex
        Load: a concentrated apex force spread over a Gaussian of width ``contact`` (over
        ℓ = a/λ) when true, a uniform pressure otherwise.
    amplitude, width
        Apex dimple amplitude over h and width over ℓ.
    wave_number, harmonics
        n and K of the subspace ``cos jnθ``, j = 0 … K (any n for K = 0).
    nodes, stretch
        Radial grid (:func:`~sweepshell.numerics.radial_chebyshev.build_radial_grid`).
    contact
        Width of the apex force's Gaussian over ℓ.
    """

    def __init__(self, *, lam: float, nu: float, clamped: bool, immovable: bool, apex: bool, amplitude: float,
                 width: float, wave_number: int, harmonics: int, nodes: int, stretch: float,
                 contact: float) -> None:
        self.lam, self.nu = float(lam), float(nu)
        self.clamped, self.immovable, self.apex = bool(clamped), bool(immovable), bool(apex)
        self.n, self.k, self.size = int(wave_number), int(harmonics), int(nodes)
        self.grid = build_radial_grid(self.size, float(stretch))
        x = self.grid.x
        self.x = x
        self.c = float(np.sqrt(3.0 * (1.0 - self.nu**2)))
        self.eps = 1.0 / self.lam**2
        self.fw, self.ff = make_radial_fields(self.size, self.n, self.k, float(stretch))
        self.theta, self.cos, self.sin, self.proj = _angular(self.n, self.k)
        # the stress-free surface over λ²: slope and curvature (axisymmetric)
        d = 2.0 * self.c * float(amplitude) / self.lam**2
        s = (self.lam / float(width)) ** 2 if amplitude else 0.0
        gauss = np.exp(-s * x**2)
        self.z0_slope = -x + 2.0 * d * s * x * gauss
        self.z0_curv = -1.0 + 2.0 * d * s * gauss * (1.0 - 2.0 * s * x**2)
        # load per unit μ, times x² (scaled as the deflection equation)
        if self.apex:
            ew = float(contact) / self.lam
            self.load_scale = 1.0 + self.lam**2 / (4.0 * self.c)
            spread = np.exp(-((x / ew) ** 2)) / (np.pi * ew**2)
            self.load_rows = 4.0 * self.c**2 / self.lam**2 * self.load_scale * x**2 * spread
        else:
            self.load_scale = 1.0
            self.load_rows = 4.0 * x**2
        self._dimple = (d, s)
        self.apex_row = build_interpolation_matrix(self.size, 1, np.zeros(1))[0]
        self.block = (self.k + 1) * self.size
        self.unknowns = 2 * self.block
        self._edge_w = self._deflection_edge_rows()
        self._edge_f = self._stress_edge_rows()
        # the stress block of the Jacobian (∂R_Φ/∂P) is constant and block-diagonal by harmonic:
        # inverted once, it is eliminated from every bordered solve (a Schur complement)
        jac = self.evaluate(np.zeros(self.unknowns + 1))[1]
        nb, m = self.block, self.size
        stress = jac[nb:, nb:2 * nb]
        self.stress_inverse = np.stack([np.linalg.inv(stress[j * m:(j + 1) * m, j * m:(j + 1) * m])
                                        for j in range(self.k + 1)])

    # -- layout -----------------------------------------------------------------------------
    def split(self, z: np.ndarray) -> tuple[np.ndarray, np.ndarray, float]:
        """Return ``W`` and ``P`` as ``(K+1, M)`` and the load parameter μ of one state ``z``."""
        k1, m = self.k + 1, self.size
        return z[:self.block].reshape(k1, m), z[self.block:self.unknowns].reshape(k1, m), float(z[-1])

    def load(self, mu: np.ndarray | float) -> np.ndarray | float:
        """Return the load of μ: pressure over p_cl, or the apex force over E h³/R."""
        return np.asarray(mu) * self.load_scale if np.ndim(mu) else float(mu) * self.load_scale

    def apex_deflection(self, z: np.ndarray) -> np.ndarray:
        """Return δ/h = −ω(0)/(2c), positive inwards, of states ``z`` ``(…, N+1)``."""
        w0 = z[..., :self.size]
        return -(self.lam**2 / (2.0 * self.c)) * (w0 @ self.apex_row)

    def volume_change(self, z: np.ndarray) -> np.ndarray:
        """Return the swept volume over the cap volume π a² H/2, ``−8 ∫₀¹ W₀ x dx`` (positive inwards)."""
        w0 = z[..., :self.size]
        return -8.0 * ((w0 * self.x) @ self.grid.integral[-1])

    def conjugate(self, z: np.ndarray) -> np.ndarray:
        """Return the displacement work-conjugate to the load: δ/h (apex force) or the swept volume (pressure)."""
        return self.apex_deflection(z) if self.apex else self.volume_change(z)

    # -- physical fields ------------------------------------------------------------------------
    def _phys(self, field: RadialField, v: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        r1 = np.einsum("jab,jb->ja", field.curvature, v)
        r2 = np.einsum("jab,jb->ja", field.p2, v)
        r3 = np.einsum("jab,jb->ja", field.p3, v)
        return self.cos @ r1, self.cos @ r2, self.sin @ r3

    def _bracket_jacobian(self, field: RadialField, c1: np.ndarray, c2: np.ndarray, c3: np.ndarray) -> np.ndarray:
        """Return ``∂/∂v Proj[P1(v) c1 + P2(v) c2 + P3(v) c3]`` as ``(N_f, N_f)``."""
        k1, m = self.k + 1, self.size
        out = np.zeros((k1, m, k1, m))
        for coef, ang, rad in ((c1, self.cos, field.curvature), (c2, self.cos, field.p2), (c3, self.sin, field.p3)):
            g = np.einsum("lq,qi,qj->lji", self.proj, coef, ang)
            out += np.einsum("lji,jia->lija", g, rad)
        return out.reshape(k1 * m, k1 * m)

    def _deflection_edge_rows(self) -> np.ndarray:
        fw = self.fw
        second = fw.slope[:, 0] if self.clamped else fw.curvature[:, 0] + self.nu * fw.slope[:, 0]
        return np.stack([fw.value[:, 0], second], axis=1)  # (K+1, 2, M)

    def _stress_edge_rows(self) -> np.ndarray:
        ff, nu = self.ff, self.nu
        rows = np.empty((self.k + 1, 2, self.size))
        for j in range(self.k + 1):
            m2 = float((j * self.n) ** 2)
            f0, f1, f2, f3 = ff.value[j, 0], ff.slope[j, 0], ff.curvature[j, 0], ff.third[j]
            if j == 0:
                # gauge Φ(1) = 0 and u_r = 0 (ε_θ = 0) or N_r = 0
                rows[j] = (f2 - nu * f1 if self.immovable else f1), f0
            elif not self.immovable:
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
        k1, m, nb = self.k + 1, self.size, self.block
        eps = self.eps
        a1, a2, a3 = self._phys(self.fw, w)
        b1, b2, b3 = self._phys(self.ff, p)
        x = self.x
        # the deformed surface over λ², ζ̃ = W + ζ₀/λ², its bracket factors
        z1 = a1 + self.z0_curv[None, :]
        z2 = a2 + (x * self.z0_slope)[None, :]
        z3 = a3
        # reference surface only: factors of 2ζ₀/λ² for the stretching bracket
        s1 = a1 + 2.0 * self.z0_curv[None, :]
        s2 = a2 + 2.0 * (x * self.z0_slope)[None, :]
        pz = self.proj @ (b1 * z2 + z1 * b2 - 2.0 * b3 * z3)
        ww = self.proj @ (a1 * s2 + s1 * a2 - 2.0 * a3 * a3)
        bil_w = np.einsum("jab,jb->ja", self.fw.bilaplacian, w)
        bil_p = np.einsum("jab,jb->ja", self.ff.bilaplacian, p)
        rw = eps * bil_w - pz
        rw[0] += mu * self.load_rows
        rf = eps * bil_p + 0.5 * ww
        jac = np.zeros((2 * nb, 2 * nb + 1))
        jww = jac[:nb, :nb]
        jww[:] = eps * _block_diag(self.fw.bilaplacian)
        jww -= self._bracket_jacobian(self.fw, b2, b1, -2.0 * b3)
        jac[:nb, nb:2 * nb] = -self._bracket_jacobian(self.ff, z2, z1, -2.0 * z3)
        jac[nb:, :nb] = self._bracket_jacobian(self.fw, z2, z1, -2.0 * z3)
        jac[nb:, nb:2 * nb] = eps * _block_diag(self.ff.bilaplacian)
        jac[:m, -1] = self.load_rows
        # edge rows: the equations at the two outermost nodes of each harmonic are replaced
        ew, ef = self._edge_w, self._edge_f
        for j in range(k1):
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
        return np.concatenate([rw.ravel(), rf.ravel()]), jac

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

    # -- fields on a polar grid ----------------------------------------------------------------
    def sample(self, z: np.ndarray, radius: np.ndarray) -> np.ndarray:
        """Return the harmonic coefficients of ω at radii ``radius`` (over a): ``(K+1, len(radius))``."""
        w, _, _ = self.split(z)
        out = np.empty((self.k + 1, radius.size))
        xi = _chebyshev_coordinate(radius, self.grid.stretch)
        for j in range(self.k + 1):
            m = j * self.n
            power = 0 if m == 0 else 2
            parity = 1 if (m - power) % 2 == 0 else -1
            e = build_interpolation_matrix(self.size, parity, xi)
            out[j] = self.lam**2 * radius**power * (e @ w[j])
        return out

    def curvature_profile(self, z: np.ndarray, radius: np.ndarray, theta: np.ndarray) -> np.ndarray:
        """Return the meridional curvature ζ_rr/λ² of the deformed surface, ``(len(theta), len(radius))``."""
        w, _, _ = self.split(z)
        g = self.grid
        xi = _chebyshev_coordinate(radius, g.stretch)
        coef = np.empty((self.k + 1, radius.size))
        for j in range(self.k + 1):
            m = j * self.n
            power = 0 if m == 0 else 2
            par = 1 if (m - power) % 2 == 0 else -1
            same = build_interpolation_matrix(self.size, par, xi)
            other = build_interpolation_matrix(self.size, -par, xi)
            v = w[j]
            d2 = same @ (g.d2[par] @ v)
            if power == 0:
                coef[j] = d2
            else:
                coef[j] = 2.0 * (same @ v) + 4.0 * radius * (other @ (g.d1[par] @ v)) + radius**2 * d2
        d, s = self._dimple
        gauss = np.exp(-s * radius**2)
        base = -1.0 + 2.0 * d * s * gauss * (1.0 - 2.0 * s * radius**2)
        cos = np.cos(np.outer(theta, self.n * np.arange(self.k + 1)))
        return cos @ coef + base[None, :]


def _chebyshev_coordinate(x: np.ndarray, stretch: float) -> np.ndarray:
    if stretch == 0.0:
        return x.copy()
    from sweepshell.numerics.radial_chebyshev import to_chebyshev_coordinate

    return to_chebyshev_coordinate(x, 1, stretch)


def _block_diag(blocks: np.ndarray) -> np.ndarray:
    k1, m, _ = blocks.shape
    out = np.zeros((k1 * m, k1 * m))
    for j in range(k1):
        out[j * m:(j + 1) * m, j * m:(j + 1) * m] = blocks[j]
    return out


@dataclass(frozen=True)
class SchurBordered:
    """Jacobians ``(k, N, N+1)`` whose constant stress block is eliminated in the bordered solve.

    With unknowns (W, P, μ) and rows (deflection, stress, border)::

        [[A, B, a], [C, S, 0], [r_W, r_P, r_μ]]

    P = S⁻¹(r₂ − C W) leaves a system of half the size,
    ``[[A − B S⁻¹C, a], [r_W − r_P S⁻¹C, r_μ]]``; ``S⁻¹`` is applied block by block (harmonics).
    """

    jac: np.ndarray
    stress_inverse: np.ndarray

    def _apply_inverse(self, x: np.ndarray) -> np.ndarray:
        """Return ``S⁻¹ x`` for ``x`` ``(k, nb, p)``."""
        k1, m, _ = self.stress_inverse.shape
        blocks = x.reshape(x.shape[0], k1, m, x.shape[-1])
        return np.einsum("lab,klbp->klap", self.stress_inverse, blocks).reshape(x.shape)

    def _reduced(self, row: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        nb = self.jac.shape[2] // 2
        a, b = self.jac[:, :nb, :nb], self.jac[:, :nb, nb:2 * nb]
        c = self.jac[:, nb:, :nb]
        sc = self._apply_inverse(c)  # (k, nb, nb)
        red = np.empty((self.jac.shape[0], nb + 1, nb + 1))
        red[:, :nb, :nb] = a - b @ sc
        red[:, :nb, nb] = self.jac[:, :nb, -1]
        red[:, nb, :nb] = row[:, :nb] - np.einsum("kb,kbn->kn", row[:, nb:2 * nb], sc)
        red[:, nb, nb] = row[:, -1]
        return red, b, sc

    def solve_bordered(self, row: np.ndarray, r: np.ndarray, c: np.ndarray) -> np.ndarray:
        """Solve ``[J; row] d = [r; c]`` (``r`` ``(k, N)`` or ``(k, N, p)``, ``c`` ``(k,)`` or ``(k, p)``)."""
        single = r.ndim == 2
        if single:
            r, c = r[:, :, None], c[:, None]
        nb = self.jac.shape[2] // 2
        red, b, sc = self._reduced(row)
        s_r2 = self._apply_inverse(r[:, nb:])  # (k, nb, p)
        rhs = np.empty((r.shape[0], nb + 1, r.shape[2]))
        rhs[:, :nb] = r[:, :nb] - b @ s_r2
        rhs[:, nb] = c - np.einsum("kb,kbp->kp", row[:, nb:2 * nb], s_r2)
        dw = np.linalg.solve(red, rhs)  # (k, nb+1, p)
        dp = s_r2 - sc @ dw[:, :nb]
        out = np.concatenate([dw[:, :nb], dp, dw[:, nb:]], axis=1)
        return out[:, :, 0] if single else out

    def orientation(self, row: np.ndarray) -> np.ndarray:
        """Sign of ``det [J; row]`` over the constant ``sign det S``."""
        return np.linalg.slogdet(self._reduced(row)[0])[0]


@dataclass(frozen=True)
class DenseBordered:
    """Dense Jacobians ``(k, N, N+1)`` with the bordered solve of :mod:`sweepshell.numerics.arclength`."""

    jac: np.ndarray

    def solve_bordered(self, row: np.ndarray, r: np.ndarray, c: np.ndarray) -> np.ndarray:
        """Solve ``[J; row] d = [r; c]`` (``r`` ``(k, N)`` or ``(k, N, p)``, ``c`` ``(k,)`` or ``(k, p)``)."""
        full = np.concatenate([self.jac, row[:, None, :]], axis=1)
        if r.ndim == 2:
            rhs = np.concatenate([r, c[:, None]], axis=1)
            return np.linalg.solve(full, rhs[:, :, None])[:, :, 0]
        rhs = np.concatenate([r, c[:, None, :]], axis=1)
        return np.linalg.solve(full, rhs)
