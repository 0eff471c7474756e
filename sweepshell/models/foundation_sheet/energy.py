"""Pseudo-spectral energy of a periodic Föppl–von Kármán film cell on a linear substrate.

Governing energy (per unit area of a square periodic cell, in-plane displacements
eliminated exactly, see Notes)::

    Π[w] = ½ ē:C:ē + (E_f h/2) Σ_{k≠0} |Ĝ_k|²/|k|⁴ + ½ Σ_k (D|k|⁴ + K(|k|)) |ŵ_k|²

with ``ē = ½⟨∇w ⊗ ∇w⟩ − diag(ε₁, ε₂)`` the mean membrane strain (compressive mismatch
strains ε₁, ε₂ positive), ``C`` the plane-stress membrane stiffness ``Ē_f h[(1−ν)𝟙 +
ν I⊗I]``, ``G = w_xx w_yy − w_xy²`` (the FvK Gaussian curvature, whose incompatibility the
in-plane displacements cannot relax), ``D = Ē_f h³/12`` and ``K(k)`` the substrate
stiffness per unit area of mode k: ``Ē_s k/2`` for an elastic half-space, a constant for a
Winkler bed. Normalisation ``⟨f²⟩ = Σ_k |f̂_k|²``.

Non-dimensionalisation: lengths in 1/k₀ (k₀ the critical wavenumber of the substrate),
height in b = √ε_c/k₀, energy in Ē_f h ε_c² (ε_c the uniaxial plane-strain critical
strain). The scaled energy then depends only on the substrate kind, the film Poisson
ratio ν and the overstrains s = ε/ε_c::

    Π̃ = ½[(1−ν) M:M + ν (tr M)²] + ((1−ν²)/2) Σ |ĝ|²/|K|⁴ + ½ Σ L(|K|) |Ŵ|²,
    M = ½⟨∇W ⊗ ∇W⟩ − diag(s₁, s₂),
    L(K) = K⁴/3 + 2K/3   (half-space),     L(K) = K⁴/2 + 1/2   (Winkler),

so that a single mode along x is neutrally stable at |K| = 1 when s₁ + ν s₂ = 1. The
reported energy is Π̃ minus its value for the flat film.

Discretisation: n × n grid on a cell of ``cells`` critical wavelengths per side, so the
grid wavenumbers are integers over ``cells``. The height holds only the modes with
``|m_x|, |m_y| ≤ n/3`` (2/3 rule) and zero mean; the curvature field G is truncated to the
same band, so the discrete energy is a well defined function of the grid values and the
gradient below is its exact gradient. Minimisation uses L-BFGS (our own, see
:func:`sweepshell.models.foundation_sheet.minimize.minimize_sheet_energy`) on the preconditioned variable z with
``Ŵ = L(K)^{-1/2} ẑ``, which makes the bending/substrate part of the Hessian the identity.

Notes
-----
Eliminating the in-plane displacements: for a given w the membrane strain is
``sym ∇u + ½∇w⊗∇w − diag(ε₁, ε₂)``; the mean part is fixed by the substrate and the
periodic part of ``sym ∇u`` relaxes every compatible fluctuation. What remains is the
Airy stress function χ with ``∇⁴χ = −E_f h G`` and stretching energy ``(1/2E_f h)⟨(∇²χ)²⟩``
(the Gaussian term of the Airy energy integrates to zero on a periodic cell). In-plane
tractions of the substrate are neglected, which is accurate for Ē_f ≫ Ē_s (Huang, Hong &
Suo 2005).

References
----------
Allen 1969; Chen & Hutchinson 2004, J. Appl. Mech. 71:597; Huang, Hong & Suo 2005,
JMPS 53:2101; Audoly & Boudaoud 2008, JMPS 56:2401.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import scipy.fft

__all__ = [
    "SUBSTRATE_KINDS",
    "SheetProblem",
    "build_sheet_problem",
    "compute_height_field",
    "compute_substrate_stiffness",
    "compute_variable_of_height",
    "evaluate_sheet_energy",
    "project_field_to_modes",
]

SUBSTRATE_KINDS = ("half_space", "winkler")


@dataclass(frozen=True)
class SheetProblem:
    """One scaled cell problem: grid operators, load and material constants.

    Attributes
    ----------
    n
        Grid points per side.
    cells
        Cell side in critical wavelengths.
    poisson_ratio
        Film Poisson ratio ν.
    overstrain
        ``(s₁, s₂) = (ε₁, ε₂)/ε_c``.
    kx, ky
        Scaled wavenumbers in the ``rfft2`` layout, shape ``(n, n//2 + 1)``.
    weight
        Parseval weights of the half spectrum (1 or 2).
    band
        Resolved modes (2/3 rule, zero mean excluded).
    stiffness
        L(|K|), bending plus substrate, per mode.
    precondition
        ``band / √L``: the map from the optimisation variable to the height.
    curvature_filter
        ``band / |K|⁴`` applied to the curvature field.
    hessian_symbols
        Fourier symbols of (∂xx, ∂yy, ∂xy), stacked for one batched FFT.
    unique_index
        Flat ``rfft2`` indices of the unique resolved modes (one of each ±k pair); the
        optimisation variable holds their real and imaginary parts.
    mirror_source, mirror_target
        Modes on the k_x = 0 axis and the flat indices of their conjugate partners.
    unique_precondition
        ``(n/√2)/√L`` at the unique modes: the map from the variable to the height
        spectrum (unit metric, bending/substrate Hessian the identity).
    unique_curvature_filter
        ``1/|K|⁴`` at the unique modes.
    unique_symbols
        Rows (L, kx², ky², kx ky, −ky², −kx², 2kx ky) at the unique modes: the linear,
        prestress and curvature-adjoint symbols of the gradient.
    moment_symbols
        Rows (kx², ky², kx ky, L): one product gives the mean strains and the linear
        energy by Parseval.
    """

    n: int
    cells: int
    substrate: str
    poisson_ratio: float
    overstrain: tuple[float, float]
    kx: np.ndarray = field(repr=False)
    ky: np.ndarray = field(repr=False)
    weight: np.ndarray = field(repr=False)
    band: np.ndarray = field(repr=False)
    stiffness: np.ndarray = field(repr=False)
    precondition: np.ndarray = field(repr=False)
    curvature_filter: np.ndarray = field(repr=False)
    hessian_symbols: np.ndarray = field(repr=False)
    unique_index: np.ndarray = field(repr=False)
    mirror_source: np.ndarray = field(repr=False)
    mirror_target: np.ndarray = field(repr=False)
    unique_precondition: np.ndarray = field(repr=False)
    unique_curvature_filter: np.ndarray = field(repr=False)
    unique_symbols: np.ndarray = field(repr=False)
    moment_symbols: np.ndarray = field(repr=False)

    @property
    def modes(self) -> int:
        """Number of unique resolved modes (the variable holds their real and imaginary parts)."""
        return int(self.unique_index.size)

    @property
    def size(self) -> int:
        """Length of the optimisation variable."""
        return 2 * self.modes

    @property
    def flat_energy(self) -> float:
        """Scaled energy of the flat film (subtracted from every reported energy)."""
        s1, s2 = self.overstrain
        nu = self.poisson_ratio
        return 0.5 * ((1 - nu) * (s1 * s1 + s2 * s2) + nu * (s1 + s2) ** 2)

    def linear_stability_margin(self) -> float:
        """Return the smallest eigenvalue of the flat-state Hessian over the resolved modes.

        Negative means the flat film of this discrete cell is unstable. The flat state is
        the global minimum when it is non-negative (every quartic term is non-negative).
        """
        s1, s2 = self.overstrain
        nu = self.poisson_ratio
        sig1, sig2 = s1 + nu * s2, s2 + nu * s1
        values = self.stiffness - sig1 * self.kx**2 - sig2 * self.ky**2
        return float(np.min(values[self.band]))


def compute_substrate_stiffness(k: np.ndarray, substrate: str) -> np.ndarray:
    """Return the scaled bending-plus-substrate stiffness L(k) of mode |K| = k.

    Parameters
    ----------
    k
        Scaled wavenumber |K| = |k|/k₀ (dimensionless).
    substrate
        ``half_space`` (K⁴/3 + 2K/3) or ``winkler`` (K⁴/2 + 1/2).
    """
    if substrate == "half_space":
        return k**4 / 3.0 + 2.0 * k / 3.0
    if substrate == "winkler":
        return 0.5 * k**4 + 0.5
    raise ValueError(f"substrate={substrate!r}; use one of {SUBSTRATE_KINDS}")


def build_sheet_problem(n: int, cells: int, substrate: str, poisson_ratio: float,
                       overstrain: tuple[float, float]) -> SheetProblem:
    """Build the grid operators of one scaled cell problem.

    Parameters
    ----------
    n
        Grid points per side (the ``modes`` parameter).
    cells
        Cell side in critical wavelengths (the ``cell_wavelengths`` parameter).
    substrate
        One of :data:`SUBSTRATE_KINDS`.
    poisson_ratio
        Film Poisson ratio.
    overstrain
        Mismatch strains over the critical strain, ``(ε₁/ε_c, ε₂/ε_c)``.
    """
    my = np.fft.fftfreq(n, 1.0 / n)
    mx = np.fft.rfftfreq(n, 1.0 / n)
    MY, MX = np.meshgrid(my, mx, indexing="ij")
    kx, ky = MX / cells, MY / cells
    weight = np.where((MX == 0) | ((n % 2 == 0) & (n // 2 == MX)), 1.0, 2.0)
    band = (np.abs(MX) <= n // 3) & (np.abs(MY) <= n // 3) & ~((MX == 0) & (MY == 0))
    kk = np.sqrt(kx**2 + ky**2)
    stiffness = compute_substrate_stiffness(kk, substrate)
    safe = np.where(band, kk, 1.0)
    precondition = np.where(band, 1.0 / np.sqrt(np.where(band, stiffness, 1.0)), 0.0)
    curvature_filter = np.where(band, 1.0 / safe**4, 0.0)
    hessian_symbols = np.stack([-kx * kx, -ky * ky, -kx * ky])
    # the variable: real and imaginary parts of one mode of each ±k pair of the band
    unique = band & ((MX > 0) | ((MX == 0) & (MY > 0)))
    unique_index = np.flatnonzero(unique)
    iy, ix = np.unravel_index(unique_index, MX.shape)
    on_axis = ix == 0
    mirror_source = np.flatnonzero(on_axis)
    mirror_target = ((n - iy[on_axis]) % n) * MX.shape[1]
    # Ŵ = (n/√2)·P·(v_re + i v_im): unit metric Σ z² = Σ v² of the grid variable
    unique_precondition = precondition.ravel()[unique_index] * (n / np.sqrt(2.0))
    u = unique_index
    kxu, kyu = kx.ravel()[u], ky.ravel()[u]
    unique_symbols = np.stack([stiffness.ravel()[u], kxu * kxu, kyu * kyu, kxu * kyu,
                               -kyu * kyu, -kxu * kxu, 2.0 * kxu * kyu])
    # a unique mode stands for its pair: Parseval weight 2, times ½ of the mean strain
    moment_symbols = unique_symbols[[1, 2, 3, 0]]
    return SheetProblem(n=int(n), cells=int(cells), substrate=substrate,
                        poisson_ratio=float(poisson_ratio),
                        overstrain=(float(overstrain[0]), float(overstrain[1])),
                        kx=kx, ky=ky, weight=weight, band=band, stiffness=stiffness,
                        precondition=precondition, curvature_filter=curvature_filter,
                        hessian_symbols=hessian_symbols, unique_index=unique_index,
                        mirror_source=mirror_source, mirror_target=mirror_target,
                        unique_precondition=unique_precondition,
                        unique_curvature_filter=curvature_filter.ravel()[u],
                        unique_symbols=unique_symbols, moment_symbols=moment_symbols)


def _rfft2_public(a: np.ndarray) -> np.ndarray:
    return scipy.fft.rfft2(a, axes=(-2, -1), workers=1)


def _irfft2_public(a: np.ndarray, n: int) -> np.ndarray:
    return scipy.fft.irfft2(a, s=(n, n), axes=(-2, -1), workers=1)


def _choose_transforms() -> tuple[Callable[[np.ndarray], np.ndarray], Callable[[np.ndarray, int], np.ndarray]]:
    """Return the (rfft2, irfft2) pair used by the energy.

    ``scipy.fft``'s argument checking and backend dispatch cost about as much as a 64 × 64
    transform itself, and the energy makes four transform calls per evaluation, so the
    transforms call scipy's pocketfft binding directly when it is present and gives the same
    bits as ``scipy.fft.rfft2``/``irfft2`` on a probe; otherwise the public functions.
    """
    try:
        from scipy.fft._pocketfft import pypocketfft as pocketfft  # type: ignore[attr-defined]

        def rfft2(a: np.ndarray) -> np.ndarray:
            return pocketfft.r2c(a, (a.ndim - 2, a.ndim - 1), True, 0, None, 1)

        def irfft2(a: np.ndarray, n: int) -> np.ndarray:
            return pocketfft.c2r(a, (a.ndim - 2, a.ndim - 1), n, False, 2, None, 1)

        probe = np.random.default_rng(0).standard_normal((2, 12, 12))
        spectrum = _rfft2_public(probe)
        if (np.array_equal(rfft2(probe), spectrum)
                and np.array_equal(irfft2(spectrum, 12), _irfft2_public(spectrum, 12))):
            return rfft2, irfft2
    except (ImportError, AttributeError, TypeError, ValueError, RuntimeError):
        pass
    return _rfft2_public, _irfft2_public


_rfft2, _irfft2 = _choose_transforms()


def evaluate_sheet_energy(problem: SheetProblem, v: np.ndarray) -> tuple[float, np.ndarray]:
    """Return the objective ``f = n²(Π̃ − Π̃_flat)`` and its exact gradient in v.

    Parameters
    ----------
    problem
        The cell problem.
    v
        Preconditioned mode variable (real and imaginary parts of the unique resolved
        modes, see :class:`SheetProblem`), length ``problem.size``.

    Returns
    -------
    f, gradient
        Scaled energy times n² (so the bending/substrate Hessian is the identity) and
        ``∂f/∂v``.
    """
    p = problem
    n = p.n
    nu = p.poisson_ratio
    s1, s2 = p.overstrain
    inv4 = 1.0 / float(n) ** 4
    m = p.modes
    Wu = np.empty(m, dtype=complex)
    Wu.real = p.unique_precondition * v[:m]
    Wu.imag = p.unique_precondition * v[m:]
    # Parseval sums of (kx², ky², kx ky, L) over the resolved modes: mean strains, exact
    Pxx, Pyy, Pxy, e_lin = (p.moment_symbols @ (Wu.real**2 + Wu.imag**2)) * inv4
    Mxx, Myy, Mxy = Pxx - s1, Pyy - s2, Pxy
    trM = Mxx + Myy
    e_mean = 0.5 * ((1 - nu) * (Mxx * Mxx + Myy * Myy + 2 * Mxy * Mxy) + nu * trM * trM)
    Nxx, Nyy, Nxy = (1 - nu) * Mxx + nu * trM, (1 - nu) * Myy + nu * trM, (1 - nu) * Mxy
    # Gaussian-curvature (Airy) part; the three second derivatives share one batched FFT
    H = _irfft2(p.hessian_symbols * _scatter_modes(p, Wu), n)
    g = H[0] * H[1] - H[2] * H[2]
    G = _rfft2(g)
    cG = 0.5 * (1 - nu * nu)
    QG = p.curvature_filter * G
    Gu = G.ravel()[p.unique_index]
    e_gauss = 2.0 * cG * inv4 * float(np.sum(p.unique_curvature_filter * (Gu.real**2 + Gu.imag**2)))
    phi = (2.0 * cG) * _irfft2(QG, n)
    # adjoint of (Wxx, Wyy, Wxy) -> g: ∂yy(φ Wxx) + ∂xx(φ Wyy) − 2 ∂xy(φ Wxy), resolved modes only
    F = _rfft2(phi * H).reshape(3, -1)[:, p.unique_index]
    a = p.unique_symbols
    Ru = (a[0] + Nxx * a[1] + Nyy * a[2] + 2.0 * Nxy * a[3]) * Wu
    Ru += a[4] * F[0] + a[5] * F[1] + a[6] * F[2]
    Ru *= p.unique_precondition * (2.0 / float(n * n))
    f = (e_mean + e_lin + e_gauss - p.flat_energy) * float(n * n)
    return f, np.concatenate([Ru.real, Ru.imag])


def _scatter_modes(p: SheetProblem, values: np.ndarray) -> np.ndarray:
    """Return the full half spectrum holding ``values`` at the unique modes (mirror filled)."""
    full = np.zeros(p.kx.shape, dtype=complex)
    flat = full.ravel()
    flat[p.unique_index] = values
    flat[p.mirror_target] = np.conj(values[p.mirror_source])
    return full


def compute_height_field(problem: SheetProblem, v: np.ndarray) -> np.ndarray:
    """Return the scaled height W (n × n grid) of a preconditioned mode variable v."""
    p = problem
    Wu = p.unique_precondition * (v[: p.modes] + 1j * v[p.modes:])
    return _irfft2(_scatter_modes(p, Wu), p.n)


def project_field_to_modes(problem: SheetProblem, field: np.ndarray) -> np.ndarray:
    """Return the mode variable whose preconditioned field is the band part of ``field``.

    This is the projection of a grid field z onto the variable space: a white-noise grid
    field gives white-noise modes (used for the seeded random starts).
    """
    p = problem
    Zu = _rfft2(np.asarray(field, dtype=float)).ravel()[p.unique_index] * (np.sqrt(2.0) / p.n)
    return np.concatenate([Zu.real, Zu.imag])


def compute_variable_of_height(problem: SheetProblem, height: np.ndarray) -> np.ndarray:
    """Return the mode variable v whose height is the band-limited part of ``height`` (scaled)."""
    p = problem
    Hu = _rfft2(np.asarray(height, dtype=float)).ravel()[p.unique_index]
    Zu = Hu / p.unique_precondition
    return np.concatenate([Zu.real, Zu.imag])
