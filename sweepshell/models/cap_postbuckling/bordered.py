"""Bordered linear solves of the cap problem's Jacobians (``cap_postbuckling``).

The stress block of the Jacobian does not depend on the state and is block-diagonal by
harmonic, so it is inverted once per problem and eliminated from every Newton step (a Schur
complement): each bordered solve is a system of half the size.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["DenseBordered", "SchurBordered"]


@dataclass(frozen=True)
class SchurBordered:
    """Jacobians ``(k, N, N+1)`` whose constant stress block is eliminated in the bordered solve.

    With unknowns (W, P, μ) and rows (deflection, stress, border)::

        [[A, B, a], [C, S, b], [r_W, r_P, r_μ]]

    P = S⁻¹(r₂ − C W − b μ) leaves a system of half the size in (W, μ),
    ``[[A, a] − B S⁻¹[C, b]; [r_W, r_μ] − r_P S⁻¹[C, b]]``; ``S⁻¹`` is applied block by block
    (harmonics).
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
        b = self.jac[:, :nb, nb:2 * nb]
        keep = np.r_[0:nb, 2 * nb]  # the (W, μ) columns
        sc = self._apply_inverse(self.jac[:, nb:, keep])  # S⁻¹[C, b], (k, nb, nb+1)
        red = np.empty((self.jac.shape[0], nb + 1, nb + 1))
        red[:, :nb] = self.jac[:, :nb, keep] - b @ sc
        red[:, nb] = row[:, keep] - np.einsum("kb,kbn->kn", row[:, nb:2 * nb], sc)
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
        dw = np.linalg.solve(red, rhs)  # (k, nb+1, p): (W, μ)
        dp = s_r2 - sc @ dw
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
