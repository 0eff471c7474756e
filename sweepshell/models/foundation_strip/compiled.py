"""Compiled residual and bordered Jacobian of the discrete strip (numba).

Same equations and the same floating-point operations, in the same order, as
:func:`~sweepshell.models.foundation_strip.bordered.compute_residual` and
:func:`~sweepshell.models.foundation_strip.bordered.compute_jacobian` (with
:func:`~sweepshell.models.foundation_strip.elastica.compute_gradient` and
:func:`~sweepshell.models.foundation_strip.elastica.compute_hessian`): the numpy versions are the
specification and the tests compare both. The kernels write the N angle rows only (and the
Jacobian's first N + 2 rows in place); the two sums of the constraint rows stay with numpy,
whose pairwise summation they reproduce. Their purpose is speed: a path to the fold evaluates
hundreds of residuals and dozens of dense Jacobians, each a handful of O(N²) numpy passes.
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["fill_angle_jacobian", "fill_angle_residual", "is_finite"]


@njit(cache=True)
def _foundation_terms(sin: np.ndarray, ybar0: np.ndarray, cubic: float,
                      h: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return V, V', V'' of the foundation at the mid-heights."""
    n = sin.shape[0]
    V, dV, d2V = np.empty(n), np.empty(n), np.empty(n)
    acc = 0.0
    for i in range(n):
        acc += sin[i]
        u = h * (acc - 0.5 * sin[i]) - ybar0[i]
        u2 = u * u
        V[i] = 0.5 * u2 + 0.25 * cubic * u2 * u2
        dV[i] = u + cubic * u2 * u
        d2V[i] = 1.0 + 3.0 * cubic * u2
    return V, dV, d2V


@njit(cache=True)
def _half_suffix(v: np.ndarray, half: float) -> np.ndarray:
    """Return Σ_{i>k} vᵢ + half·v_k for every k (summed from the end, as numpy's reversed cumsum)."""
    n = v.shape[0]
    out = np.empty(n)
    acc = 0.0
    for k in range(n - 1, -1, -1):
        out[k] = acc + half * v[k]
        acc += v[k]
    return out


@njit(cache=True)
def fill_angle_residual(phi: np.ndarray, sin: np.ndarray, cos: np.ndarray, P: float, R: float,
                        kappa0: np.ndarray, ybar0: np.ndarray, cubic: float, h: float, out: np.ndarray) -> None:
    """Write the N angle rows ``∇E/h − P sin φ + R cos φ`` into ``out[:N]`` (``sin``, ``cos`` of ``phi`` given)."""
    n = phi.shape[0]
    V, dV, _ = _foundation_terms(sin, ybar0, cubic, h)
    q = np.empty(n)
    for i in range(n):
        q[i] = h * cos[i] * dV[i]
    S = _half_suffix(q, 0.5)
    for i in range(n):
        g = 0.0
        if i > 0:
            g += (phi[i] - phi[i - 1] - kappa0[i - 1]) / h
        if i < n - 1:
            g -= (phi[i + 1] - phi[i] - kappa0[i]) / h
        g = g + h * cos[i] * S[i] - h * sin[i] * V[i]
        out[i] = g / h - P * sin[i] + R * cos[i]


@njit(cache=True)
def fill_angle_jacobian(sin: np.ndarray, cos: np.ndarray, P: float, R: float, ybar0: np.ndarray, cubic: float,
                        h: float, L: float, J: np.ndarray) -> None:
    """Write the first N + 2 rows of the bordered Jacobian into ``J`` (shape ``(N + 3, N + 3)``).

    Rows N and N + 1 are the end-shortening and end-height constraints, the last row (the
    bordering row) is left to the caller. ``sin``, ``cos`` are those of the angles φ (numpy's, so
    that the results equal the specification's to the last bit).
    """
    n = sin.shape[0]
    V, dV, d2V = _foundation_terms(sin, ybar0, cubic, h)
    q, w, hc, a = np.empty(n), np.empty(n), np.empty(n), np.empty(n)
    for i in range(n):
        q[i] = h * cos[i] * dV[i]
        w[i] = h * cos[i] * d2V[i]
        hc[i] = h * cos[i]
        a[i] = -h * sin[i] * dV[i]
    S = _half_suffix(q, 0.5)
    m_off = _half_suffix(w, 0.5)
    m_diag = _half_suffix(w, 0.25)
    for i in range(n):
        for k in range(i):
            # M_ik = sw + w/2 at max(i, k) = i; X_ik = a_i h cos_k (k < i), X_ki = 0
            hik = m_off[i] * (hc[i] * hc[k]) + (a[i] * (h * cos[k]) + 0.0)
            J[i, k] = hik
            J[k, i] = m_off[i] * (hc[k] * hc[i]) + (0.0 + a[i] * (h * cos[k]))
        bend = 2.0 / h if 0 < i < n - 1 else 1.0 / h
        xd = a[i] * (h * 0.5 * cos[i])
        J[i, i] = m_diag[i] * (hc[i] * hc[i]) + (xd + xd) + (bend - h * sin[i] * S[i] - h * cos[i] * V[i])
    inv_h = 1.0 / h
    for i in range(n - 1):
        J[i, i + 1] -= inv_h
        J[i + 1, i] -= inv_h
    for i in range(n):
        for k in range(n):
            J[i, k] = J[i, k] / h
        J[i, i] += -P * cos[i] - R * sin[i]
        J[i, n] = -sin[i]
        J[i, n + 1] = cos[i]
        J[i, n + 2] = 0.0
        J[n, i] = h * sin[i] / L
        J[n + 1, i] = h * cos[i] / L
    J[n, n], J[n, n + 1], J[n, n + 2] = 0.0, 0.0, -1.0
    J[n + 1, n], J[n + 1, n + 1], J[n + 1, n + 2] = 0.0, 0.0, 0.0


@njit(cache=True)
def is_finite(a: np.ndarray) -> bool:
    """Whether every entry of the 2-d array ``a`` is finite."""
    for i in range(a.shape[0]):
        for k in range(a.shape[1]):
            if not np.isfinite(a[i, k]):
                return False
    return True
