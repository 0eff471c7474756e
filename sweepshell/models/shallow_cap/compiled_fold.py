"""Direct solve of a limit point of the shallow-cap path problem, one cap at a time (numba).

A limit point (fold) of the load is a state where ``R(z) = 0`` and the path's tangent ``t``
(``∂R/∂z t = 0``) has no load component. Newton's method on ``R(z) = 0, t_μ(z) = 0`` with
``t`` normalised by a fixed row (``row·t = 1``) needs the derivative of ``t`` along a change
``dz``: ``∂R/∂z dt = −R''[t, dz]``, ``row·dt = 0``. The residual is a quadratic polynomial of
``z`` (:mod:`.compiled_newton`: bilinear stress × slope terms and the square of the slope), so
``R''`` is constant and written out below. Each iteration factorises the bordered matrix
``[∂R/∂z; row]`` once (stretching block eliminated as in :mod:`.compiled_newton`) and solves
it for four right-hand sides: ``dz = dz₀ + α t`` with ``α`` chosen so that the new tangent
has no load component. The iteration converges quadratically from inside the corner of the
path around the fold, not from before it (Newton on a load component that saturates away
from the fold); the trace (:mod:`.compiled`) calls it there and checks where it lands.
The measurements behind the start rule are in ``theory.md``.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from sweepshell.models.shallow_cap.compiled_newton import (
    _P_APEX,
    _P_FS,
    _P_KAP,
    _P_MISMATCH,
    _reduced_system,
    _residual,
    axpy,
    wdot,
)

__all__ = ["FOLD_REACH", "FOLD_START", "solve_fold", "try_fold"]

# the direct solve is tried from path points whose unit tangent's load component is below this
# (where it converges and where it pays: theory.md)
FOLD_START = 0.3
# and its result kept no farther than this many times the linearly extrapolated distance
FOLD_REACH = 2.0


@njit(cache=True)
def _lu_factor(a: np.ndarray, piv: np.ndarray) -> float:
    """LU with partial pivoting of the square ``a`` in place (multipliers below the diagonal); sign of det."""
    n = a.shape[0]
    sign = 1.0
    hi = np.uint64(n)
    u = np.empty(n)  # the pivot row in its own buffer: the updated rows cannot alias it (vectorised)
    for k in range(n):
        p = k
        big = abs(a[k, k])
        for i in range(k + 1, n):
            if abs(a[i, k]) > big:
                big = abs(a[i, k])
                p = i
        piv[k] = p
        if p != k:
            sign = -sign
            for j in range(hi):
                tmp = a[k, j]
                a[k, j] = a[p, j]
                a[p, j] = tmp
        ak = a[k]
        for j in range(np.uint64(k), hi):
            u[j] = ak[j]
        if u[k] < 0.0:
            sign = -sign
        elif u[k] == 0.0:
            return 0.0
        inv = 1.0 / u[k]
        lo1 = np.uint64(k + 1)
        for i in range(k + 1, n):
            ai = a[i]
            lik = ai[k] * inv
            ai[k] = lik
            for j in range(lo1, hi):
                ai[j] -= lik * u[j]
    return sign


@njit(cache=True)
def _lu_apply(a: np.ndarray, piv: np.ndarray, rhs: np.ndarray) -> None:
    """Solve with the factors of :func:`_lu_factor` for the two right-hand sides ``rhs`` ``(2, n)`` in place.

    Both are substituted together: two independent sums hide the add latency.
    """
    n = a.shape[0]
    r0, r1 = rhs[0], rhs[1]
    for k in range(n):
        p = piv[k]
        if p != k:
            r0[k], r0[p] = r0[p], r0[k]
            r1[k], r1[p] = r1[p], r1[k]
    for i in range(1, n):
        ai = a[i]
        acc0, acc1 = r0[i], r1[i]
        for j in range(i):
            acc0 -= ai[j] * r0[j]
            acc1 -= ai[j] * r1[j]
        r0[i], r1[i] = acc0, acc1
    for i in range(n - 1, -1, -1):
        ai = a[i]
        acc0, acc1 = r0[i], r1[i]
        for j in range(i + 1, n):
            acc0 -= ai[j] * r0[j]
            acc1 -= ai[j] * r1[j]
        r0[i], r1[i] = acc0 / ai[i], acc1 / ai[i]


@njit(cache=True)
def _bordered_solve(lu: np.ndarray, piv: np.ndarray, a1: np.ndarray, a2: np.ndarray, c: np.ndarray,
                    arm: np.ndarray, b: np.ndarray, bt: np.ndarray, bj: np.ndarray, row: np.ndarray,
                    out: np.ndarray) -> None:
    """Solve ``[∂R/∂z; row] d = [a1; a2; c]`` for two right-hand sides (columns of ``a1``, ``a2``, ``c``)."""
    m = arm.shape[0]
    rhs = np.empty((2, m + 1))
    ba2 = np.zeros(m)
    for col in range(2):
        ba2[:] = 0.0
        for j in range(m):
            if a2[j, col] != 0.0:
                axpy(ba2, a2[j, col], bt[j])
        acc = c[col]
        for i in range(m):
            rhs[col, i] = a1[i, col] - arm[i] * ba2[i]
            acc -= row[m + i] * ba2[i]
        rhs[col, m] = acc
        out[m:2 * m, col] = ba2
    _lu_apply(lu, piv, rhs)
    back = np.empty(m)
    for col in range(2):
        dmu = rhs[col, m]
        back[:] = 0.0
        for j in range(m):
            out[j, col] = rhs[col, j]
            axpy(back, arm[j] * rhs[col, j], bt[j])
        for i in range(m):
            out[m + i, col] += -back[i] - bj[i] * dmu
        out[2 * m, col] = dmu


@njit(cache=True)
def _second_derivative(u: np.ndarray, v: np.ndarray, prm: np.ndarray, eig: np.ndarray, sigma: np.ndarray,
                       out1: np.ndarray, out2: np.ndarray) -> None:
    """Write ``R''[u, v]`` (constant: the residual is quadratic) into ``out1`` (bending), ``out2`` (compatibility)."""
    m = sigma.shape[0]
    fs, kap = prm[_P_FS], prm[_P_KAP]
    apex, eigen = prm[_P_APEX] != 0.0, prm[_P_MISMATCH] != 0.0
    for i in range(m):
        # slope and stress increments, load terms included (the apex singularity, the eigenstrain stress)
        yu = u[i] + (kap * fs * sigma[i] * u[2 * m] if apex else 0.0)
        yv = v[i] + (kap * fs * sigma[i] * v[2 * m] if apex else 0.0)
        fu = u[m + i] + (fs * eig[i] * u[2 * m] if eigen else 0.0)
        fv = v[m + i] + (fs * eig[i] * v[2 * m] if eigen else 0.0)
        out1[i] = -(fu * yv + fv * yu)
        out2[i] = -yu * yv
    out1[0] = 0.0  # the edge rows are linear
    out2[0] = 0.0


@njit(cache=True)
def solve_fold(z: np.ndarray, row: np.ndarray, w: np.ndarray, tol: float, max_iter: int, prm: np.ndarray,
               imp: np.ndarray, eig: np.ndarray, b: np.ndarray, bt: np.ndarray, x: np.ndarray, xl: np.ndarray,
               xlt: np.ndarray, d1e: np.ndarray, sigma: np.ndarray, t_out: np.ndarray) -> tuple[bool, int, float]:
    """Newton-solve for the limit point near ``z`` (in place); write its unit tangent into ``t_out``.

    ``row`` (``w`` times the tangent at the start) normalises the tangent, which ends oriented
    along it. Returns (converged, iterations, orientation: the sign of ``det [∂R/∂z; row]`` at
    the last linearisation, as ``correct_one`` reports it). A corrector whose update stops
    contracting quadratically fails at once.
    """
    m = x.shape[0]
    m1 = 2 * m + 1
    arm, ftot, r1, r2 = np.empty(m), np.empty(m), np.empty(m), np.empty(m)
    j1mu, j2mu = np.empty(m), np.empty(m)
    piv = np.empty(m + 1, dtype=np.int64)
    a1, a2, c = np.empty((m, 2)), np.empty((m, 2)), np.zeros(2)
    sol, sol2 = np.empty((m1, 2)), np.empty((m1, 2))
    s1, s2 = np.empty(m), np.empty(m)
    dz, t = np.empty(m1), np.empty(m1)
    last = np.inf
    orientation = 0.0
    for its in range(1, max_iter + 1):
        _residual(z, prm, imp, eig, x, xlt, d1e, sigma, arm, ftot, r1, r2, j1mu, j2mu)
        bj, btrf, br2 = np.zeros(m), np.zeros(m), np.zeros(m)
        for j in range(m):
            axpy(bj, j2mu[j], bt[j])
            axpy(btrf, row[m + j], b[j])
        g = _reduced_system(row, 0.0, prm, b, xl, d1e, arm, ftot, r1, j1mu, br2, bj, btrf)
        lu = np.ascontiguousarray(g[:, :m + 1])
        orientation = _lu_factor(lu, piv)
        if orientation == 0.0:
            return False, its, orientation
        for i in range(m):
            a1[i, 0], a2[i, 0], a1[i, 1], a2[i, 1] = -r1[i], -r2[i], 0.0, 0.0
        c[0], c[1] = 0.0, 1.0
        _bordered_solve(lu, piv, a1, a2, c, arm, b, bt, bj, row, sol)  # Newton step dz₀, tangent t
        for i in range(m1):
            dz[i], t[i] = sol[i, 0], sol[i, 1]
        _second_derivative(t, dz, prm, eig, sigma, s1, s2)
        for i in range(m):
            a1[i, 0], a2[i, 0] = -s1[i], -s2[i]
        _second_derivative(t, t, prm, eig, sigma, s1, s2)
        for i in range(m):
            a1[i, 1], a2[i, 1] = -s1[i], -s2[i]
        c[1] = 0.0
        _bordered_solve(lu, piv, a1, a2, c, arm, b, bt, bj, row, sol2)
        # the tangent's load component after dz = dz₀ + α t vanishes (to first order)
        alpha = -(t[m1 - 1] + sol2[m1 - 1, 0]) / sol2[m1 - 1, 1]
        for i in range(m1):
            dz[i] += alpha * t[i]
        size = np.sqrt(wdot(dz, dz, w))
        if not np.isfinite(size) or (size > 0.5 * last + 1e-14 and its > 1):
            return False, its, orientation
        for i in range(m1):
            z[i] += dz[i]
        prev = last
        last = size
        if size < tol or (np.isfinite(prev) and size**3 < tol * prev**2 and size < 1e-4):
            # the tangent at the new state: t + dt, dt = dt₀ + α dt₁ (its load component is 0 there)
            for i in range(m1):
                t_out[i] = t[i] + sol2[i, 0] + alpha * sol2[i, 1]
            t_out[m1 - 1] = 0.0
            norm = np.sqrt(wdot(t_out, t_out, w))
            for i in range(m1):
                t_out[i] /= norm
            return True, its, orientation
    return False, max_iter, orientation


@njit(cache=True)
def try_fold(zn: np.ndarray, tn: np.ndarray, t_prev: np.ndarray, h: float, w: np.ndarray, tol: float,
             max_iter: int, orient_ref: float, below: float, prm: np.ndarray, imp: np.ndarray, eig: np.ndarray,
             b: np.ndarray, bt: np.ndarray, x: np.ndarray, xl: np.ndarray, xlt: np.ndarray, d1e: np.ndarray,
             sigma: np.ndarray, z_out: np.ndarray, t_out: np.ndarray) -> tuple[bool, float]:
    """Solve for the limit point ahead of the accepted path point ``zn`` (tangent ``tn``), inside its corner.

    Tried only where the tangent's load component is positive, below ``below`` and falling
    (from ``t_prev`` over the step ``h``). The result is kept only if it lies ahead of ``zn``
    along ``tn``, at a load no lower, with the path's orientation ``orient_ref``, and no farther
    than ``FOLD_REACH`` times the distance at which the load component, extrapolated linearly
    from the last step, reaches zero (inside a corner it falls ever faster, so the limit point
    is nearer than that). Returns (kept, distance from ``zn`` in the arclength norm).
    """
    m1 = zn.shape[0]
    tmu, tmu_prev = tn[m1 - 1], t_prev[m1 - 1]
    if not (0.0 < tmu < below and tmu < tmu_prev):
        return False, 0.0
    reach = FOLD_REACH * tmu * h / (tmu_prev - tmu)
    for i in range(m1):
        z_out[i] = zn[i]
    ok, _, orient = solve_fold(z_out, tn * w, w, tol, max_iter, prm, imp, eig, b, bt, x, xl, xlt, d1e, sigma,
                               t_out)
    if not ok or orient != orient_ref or z_out[m1 - 1] < zn[m1 - 1]:
        return False, 0.0
    ahead = 0.0
    dist = 0.0
    for i in range(m1):
        d = z_out[i] - zn[i]
        ahead += d * tn[i] * w[i]
        dist += d * d * w[i]
    dist = np.sqrt(dist)
    return ahead > 0.0 and dist <= reach, dist
