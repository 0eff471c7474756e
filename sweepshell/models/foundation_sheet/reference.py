"""A straightforward reference solver of the film cell: displacements kept, no tricks.

Same physics and scaling as :mod:`sweepshell.models.foundation_sheet.energy`, written the direct
way, to check the fast solver and to time it against:

* the in-plane displacements (U, V) are unknowns next to the height W (3n² unknowns)
  instead of being eliminated through the Airy stress function;
* the membrane strain is formed on the grid by collocation,
  ``e = sym ∇U + ½ ∇W ⊗ ∇W − diag(s₁, s₂)``, with no dealiasing;
* no preconditioning; ``scipy.optimize.minimize(method="L-BFGS-B")`` with the analytic
  gradient.

Scaled variables: W = w/b, U = u k₀/ε_c, energy in Ē_f h ε_c² (see
:mod:`sweepshell.models.foundation_sheet.energy`), reported relative to the flat film.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.optimize

from sweepshell.models.foundation_sheet.energy import compute_substrate_stiffness

__all__ = ["ReferenceSheetMinimum", "evaluate_reference_energy", "minimize_reference_energy"]


@dataclass(frozen=True)
class ReferenceSheetMinimum:
    """Result of the reference minimisation (height scaled, energy scaled)."""

    height: np.ndarray
    energy: float
    converged: bool
    iterations: int


def _make_symbols(n: int, cells: int, substrate: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    m = np.fft.fftfreq(n, 1.0 / n)
    m_first = np.where(np.abs(m) == n / 2, 0.0, m)  # the Nyquist mode has no real derivative
    my, mx = np.meshgrid(m_first, m_first, indexing="ij")
    kx, ky = mx / cells, my / cells
    MY, MX = np.meshgrid(m, m, indexing="ij")
    stiffness = compute_substrate_stiffness(np.hypot(MX, MY) / cells, substrate)
    stiffness[0, 0] = 0.0  # the mean height costs nothing on a half-space; none on Winkler either
    return kx, ky, stiffness


def evaluate_reference_energy(x: np.ndarray, n: int, cells: int, substrate: str, poisson_ratio: float,
                              overstrain: tuple[float, float]) -> tuple[float, np.ndarray]:
    """Return ``n²`` times the scaled energy and its gradient in x = (U, V, W) stacked."""
    kx, ky, stiffness = _make_symbols(n, cells, substrate)
    nu = poisson_ratio
    s1, s2 = overstrain
    U, V, W = x.reshape(3, n, n)
    Uh, Vh, Wh = np.fft.fft2(U), np.fft.fft2(V), np.fft.fft2(W)

    def dx(a_hat: np.ndarray) -> np.ndarray:
        return np.fft.ifft2(1j * kx * a_hat).real

    def dy(a_hat: np.ndarray) -> np.ndarray:
        return np.fft.ifft2(1j * ky * a_hat).real

    Wx, Wy = dx(Wh), dy(Wh)
    exx = dx(Uh) + 0.5 * Wx * Wx - s1
    eyy = dy(Vh) + 0.5 * Wy * Wy - s2
    exy = 0.5 * (dy(Uh) + dx(Vh)) + 0.5 * Wx * Wy
    tr = exx + eyy
    membrane = 0.5 * np.mean((1 - nu) * (exx**2 + eyy**2 + 2 * exy**2) + nu * tr**2)
    linear = 0.5 * float(np.sum(stiffness * np.abs(Wh) ** 2)) / n**4
    flat = 0.5 * ((1 - nu) * (s1 * s1 + s2 * s2) + nu * (s1 + s2) ** 2)
    nxx, nyy, nxy = (1 - nu) * exx + nu * tr, (1 - nu) * eyy + nu * tr, (1 - nu) * exy
    gU = -(dx(np.fft.fft2(nxx)) + dy(np.fft.fft2(nxy)))
    gV = -(dx(np.fft.fft2(nxy)) + dy(np.fft.fft2(nyy)))
    gW = (np.fft.ifft2(stiffness * Wh).real - dx(np.fft.fft2(nxx * Wx + nxy * Wy))
          - dy(np.fft.fft2(nxy * Wx + nyy * Wy)))
    f = (membrane + linear - flat) * n * n
    return float(f), np.concatenate([gU.ravel(), gV.ravel(), gW.ravel()])


def minimize_reference_energy(n: int, cells: int, substrate: str, poisson_ratio: float,
                              overstrain: tuple[float, float], height0: np.ndarray, *,
                              gradient_tolerance: float = 1e-7,
                              max_iterations: int = 200_000) -> ReferenceSheetMinimum:
    """Minimise the displacement-form energy from a flat in-plane state and ``height0``.

    Parameters
    ----------
    n, cells, substrate, poisson_ratio, overstrain
        As in :func:`sweepshell.models.foundation_sheet.energy.build_sheet_problem`.
    height0
        Scaled start height (n × n).
    gradient_tolerance
        ``gtol`` of L-BFGS-B on the unscaled gradient.
    max_iterations
        Iteration cap.
    """
    x0 = np.concatenate([np.zeros(2 * n * n), np.asarray(height0, dtype=float).ravel()])
    res = scipy.optimize.minimize(
        evaluate_reference_energy, x0, args=(n, cells, substrate, poisson_ratio, overstrain), jac=True,
        method="L-BFGS-B", options={"maxiter": max_iterations, "maxfun": 2 * max_iterations,
                                    "gtol": gradient_tolerance, "ftol": 1e-14})
    W = res.x[2 * n * n:].reshape(n, n)
    return ReferenceSheetMinimum(height=W - W.mean(), energy=float(res.fun) / n**2,
                                 converged=bool(res.success), iterations=int(res.nit))
