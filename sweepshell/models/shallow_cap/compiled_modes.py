"""Compiled assembly of the shallow-cap stability matrices (numba)."""

from __future__ import annotations

import numpy as np
from numba import njit

from sweepshell.models.shallow_cap.compiled_newton import lu_solve

__all__ = ["assemble_reduced_stability", "slogdet_in_place"]


@njit(cache=True)
def assemble_reduced_stability(bilap: np.ndarray, bracket: np.ndarray, w2: np.ndarray, w0e: np.ndarray,
                               w1e: np.ndarray, w2e: np.ndarray, x: np.ndarray, red_sliding: np.ndarray,
                               red_immovable: np.ndarray, left: np.ndarray, right: np.ndarray,
                               corrected: np.ndarray, group: np.ndarray, f: np.ndarray, df: np.ndarray,
                               zeta1: np.ndarray, zeta2: np.ndarray, nu: np.ndarray, clamped: np.ndarray,
                               immovable: np.ndarray,
                               keep_row1: bool) -> np.ndarray:
    """Return the reduced stability matrices ``A − B S⁻¹ C`` ``(k, M, M)`` of one wave number.

    Compiled form of ``shallow_cap_modes._deflection_blocks`` and the stress elimination of
    ``_reduced_matrices`` (same formulas, fused per state). ``bilap``, ``bracket``, ``w2`` are
    the deflection operators, ``w0e``, ``w1e``, ``w2e`` their edge rows; ``red_sliding``,
    ``red_immovable`` are ``[P₁; P₂] S⁻¹`` at ν = 0 of the two in-plane edges, and a state of
    (ν, in-plane edge) group ``g = group[p]`` with ``corrected[g]`` subtracts ``left[g] @ right[g]``
    from it (the immovable edge's ν, ``modes._build_poisson_correction``); ``keep_row1``:
    sliding n = 1 keeps the interior equation in row 1 of ``C``.
    """
    k, m = f.shape
    out = np.empty((k, m, m))
    c = np.empty((m, m))
    g = np.empty((m, m))
    for p in range(k):
        a = out[p]
        for i in range(m):
            dfi = df[p, i]
            xfi = x[i] * f[p, i]
            z2i = zeta2[p, i]
            xz1i = x[i] * zeta1[p, i]
            for j in range(m):
                a[i, j] = bilap[i, j] + dfi * bracket[i, j] + xfi * w2[i, j]
                c[i, j] = z2i * bracket[i, j] + xz1i * w2[i, j]
        for j in range(m):
            a[0, j] = w0e[j]
            a[1, j] = w1e[j] if clamped[p] else w2e[j] + nu[p] * w1e[j]
            c[0, j] = 0.0
            if immovable[p]:
                c[1, j] = zeta1[p, 0] * w1e[j]
            elif not keep_row1:
                c[1, j] = 0.0
        # rows 0, 1 of B are edge rows (zero)
        red = red_immovable if immovable[p] else red_sliding
        for j in range(m):
            g[0, j] = 0.0
            g[1, j] = 0.0
        for i in range(2, m):
            z2i = zeta2[p, i]
            xz1i = x[i] * zeta1[p, i]
            for j in range(m):
                g[i, j] = z2i * red[i, j] + xz1i * red[m + i, j]
        a += np.dot(g, c)
        q = group[p]
        if corrected[q]:
            lf = left[q]
            rc = np.dot(right[q], c)
            for i in range(2, m):
                l0 = zeta2[p, i] * lf[i, 0] + x[i] * zeta1[p, i] * lf[m + i, 0]
                l1 = zeta2[p, i] * lf[i, 1] + x[i] * zeta1[p, i] * lf[m + i, 1]
                for j in range(m):
                    a[i, j] -= l0 * rc[0, j] + l1 * rc[1, j]
    return out


@njit(cache=True)
def slogdet_in_place(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Return ``(sign, log|det|)`` of the matrices ``a`` ``(k, M, M)``, overwriting them with their LU factors.

    The corrector's LU with partial pivoting (:func:`~.compiled_newton.lu_solve`, no right-hand
    side). For the small matrices of scans on a state's own grid it is faster than
    ``np.linalg.slogdet``, which copies each matrix and calls LAPACK one matrix at a time
    (``benchmarks/bench_small_slogdet.py``); LAPACK's blocked LU wins on large ones.
    """
    k, n, _ = a.shape
    sign = np.empty(k)
    logdet = np.empty(k)
    u = np.empty(n)
    for p in range(k):
        g = a[p]
        sign[p] = lu_solve(g, n, u)
        acc = 0.0
        for i in range(n):
            acc += np.log(abs(g[i, i]))
        logdet[p] = acc if sign[p] != 0.0 else -np.inf
    return sign, logdet
