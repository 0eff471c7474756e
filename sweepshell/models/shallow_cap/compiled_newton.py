"""Compiled Newton corrector of the shallow-cap path problem, one cap at a time (numba).

Same equations, Jacobian and algorithm as :class:`~sweepshell.models.shallow_cap.kernels.CapPathProblem`
(residual and Schur-complement bordered solve) and :func:`sweepshell.numerics.arclength.correct_on_arc`
(Newton on the pseudo-arclength bordered system, tangent as a second right-hand side). The numpy
versions are the specification (and serve the tests that compare both); results agree to rounding.

Per-cap scalars are packed in one array ``prm`` (indices ``_P_*`` below); per-cap vectors are
the dimple slope ``imp`` and the mismatch stress ``eig`` over λ² at the nodes and the inverse
stretching block ``b``; shared by all caps of a grid: nodes ``x``, ``xl = x L`` (collocated
``x(u'' + u'/x − u/x²)``), the edge row of ``d/dx`` ``d1e``, the apex singularity ``σ`` and the
integration weights ``integ`` of ``∫₀¹ u dx``. Kernels in other modules call these: numba's cache
of a kernel is keyed on its own file only (see DEVELOPERS.md).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from sweepshell.models.shallow_cap.kernels import CapPathProblem

__all__ = ["correct_one", "lu_solve", "newton_solve", "pack_cap_parameters", "wdot"]

_P_EPS, _P_NU, _P_KAP, _P_FS, _P_CLAMPED, _P_IMMOVABLE, _P_APEX, _P_MISMATCH, _P_EDGE, _P_DEFL = range(10)
_TRACE_RUNNING, _TRACE_DONE, _TRACE_STALLED, _TRACE_STEP_LIMIT = 0, 1, 2, 3


def pack_cap_parameters(pb: CapPathProblem) -> np.ndarray:
    """Return the ``(n, 10)`` per-cap scalars of ``pb`` in the kernels' layout."""
    n = pb.lam.shape[0]
    c = np.sqrt(3.0 * (1.0 - pb.nu**2))
    prm = np.empty((n, 10))
    prm[:, _P_EPS] = 1.0 / pb.lam**2
    prm[:, _P_NU] = pb.nu
    prm[:, _P_KAP] = pb.kappa
    prm[:, _P_FS] = pb.force_scale
    prm[:, _P_CLAMPED] = pb.clamped
    prm[:, _P_IMMOVABLE] = pb.immovable
    prm[:, _P_APEX] = pb.apex
    prm[:, _P_MISMATCH] = pb.mismatch
    prm[:, _P_EDGE] = pb.eigen_edge
    prm[:, _P_DEFL] = pb.lam**2 / (2.0 * c)
    return prm


@njit(cache=True)
def wdot(a: np.ndarray, b: np.ndarray, w: np.ndarray) -> float:
    acc = 0.0
    for i in range(a.shape[0]):
        acc += a[i] * b[i] * w[i]
    return acc


@njit(cache=True)
def lu_solve(g: np.ndarray, n: int, u: np.ndarray) -> float:
    """Solve ``a X = r`` for the augmented ``g = [a | r]`` ``(n, n+p)`` in place (X replaces r).

    LU with partial pivoting; returns the sign of ``det a`` (±1, 0 if a pivot is zero). The
    row updates index with unsigned integers: without negative-index wraparound checks the
    compiler vectorises them (several times faster). An exactly singular pivot gives inf/NaN,
    which callers test for.
    """
    w = g.shape[1]
    sign = 1.0
    for k in range(n):
        piv = k
        big = abs(g[k, k])
        for i in range(k + 1, n):
            v = abs(g[i, k])
            if v > big:
                big = v
                piv = i
        lo = np.uint64(k)
        hi = np.uint64(w)
        gk = g[k]
        if piv != k:
            sign = -sign
            gp = g[piv]
            for j in range(lo, hi):
                tmp = gk[j]
                gk[j] = gp[j]
                gp[j] = tmp
        # the pivot row in its own buffer: the updated rows then cannot alias it
        for j in range(lo, hi):
            u[j] = gk[j]
        if u[k] < 0.0:
            sign = -sign
        elif u[k] == 0.0:
            sign = 0.0
        inv = 1.0 / u[k]
        lo1 = np.uint64(k + 1)
        for i in range(k + 1, n):
            gi = g[i]
            lik = gi[k] * inv
            for j in range(lo1, hi):
                gi[j] -= lik * u[j]
    # back substitution, right-hand sides in pairs: two independent sums hide the add latency
    sol = np.empty((w - n, n))
    for col in range(n, w, 2):
        pair = col + 1 < w
        x0 = sol[col - n]
        x1 = sol[col + 1 - n] if pair else x0
        for k in range(n - 1, -1, -1):
            gk = g[k]
            acc0 = gk[col]
            acc1 = gk[col + 1] if pair else 0.0
            for i in range(k + 1, n):
                acc0 -= gk[i] * x0[i]
                acc1 -= gk[i] * x1[i]
            x0[k] = acc0 / gk[k]
            if pair:
                x1[k] = acc1 / gk[k]
    for col in range(n, w):
        for k in range(n):
            g[k, col] = sol[col - n, k]
    return sign


@njit(cache=True)
def axpy(y: np.ndarray, alpha: float, v: np.ndarray) -> None:
    """``y += alpha·v`` (unsigned indices, vectorised)."""
    for j in range(np.uint64(y.shape[0])):
        y[j] += alpha * v[j]


@njit(cache=True)
def _residual(z: np.ndarray, prm: np.ndarray, imp: np.ndarray, eig: np.ndarray, x: np.ndarray, xlt: np.ndarray,
              d1e: np.ndarray, sigma: np.ndarray, arm: np.ndarray, ftot: np.ndarray, r1: np.ndarray,
              r2: np.ndarray, j1mu: np.ndarray, j2mu: np.ndarray) -> None:
    """Write the residuals ``r1``, ``r2`` at ``z``, their load derivatives and the lever ``arm``, ``ftot``."""
    m = x.shape[0]
    eps, nu, kap, fs = prm[_P_EPS], prm[_P_NU], prm[_P_KAP], prm[_P_FS]
    clamped, immovable = prm[_P_CLAMPED] != 0.0, prm[_P_IMMOVABLE] != 0.0
    apex, eigen = prm[_P_APEX] != 0.0, prm[_P_MISMATCH] != 0.0
    mu = z[2 * m]
    q = 0.0 if (apex or eigen) else mu
    p = mu * fs if apex else 0.0
    e = mu * fs if eigen else 0.0
    dp = kap * fs if apex else 0.0
    de = fs if eigen else 0.0
    ly = np.zeros(m)
    lf = np.zeros(m)
    for j in range(m):
        axpy(ly, z[j], xlt[j])
        axpy(lf, z[m + j], xlt[j])
    for i in range(m):
        yb = z[i] + kap * p * sigma[i]
        sh = x[i] - imp[i]
        arm[i] = sh - yb
        ftot[i] = z[m + i] + e * eig[i]
        r1[i] = -eps * ly[i] + ftot[i] * arm[i] - 2.0 * q * x[i] ** 2
        r2[i] = eps * lf[i] + sh * yb - 0.5 * yb * yb
        if apex:
            j1mu[i] = -z[m + i] * sigma[i] * dp
        elif eigen:
            j1mu[i] = de * eig[i] * arm[i]
        else:
            j1mu[i] = -2.0 * x[i] ** 2
        j2mu[i] = arm[i] * sigma[i] * dp
    dy = 0.0
    df = 0.0
    for j in range(m):
        dy += d1e[j] * z[j]
        df += d1e[j] * z[m + j]
    r1[0] = z[0] if clamped else dy + nu * z[0] - 0.5 * kap * p
    r2[0] = (df - nu * z[m] if immovable else z[m]) - e * prm[_P_EDGE]
    arm[0] = 0.0
    j1mu[0] = 0.0 if clamped else -0.5 * dp
    j2mu[0] = -de * prm[_P_EDGE]


@njit(cache=True)
def _reduced_system(row: np.ndarray, c0: float, prm: np.ndarray, b: np.ndarray, xl: np.ndarray, d1e: np.ndarray,
                    arm: np.ndarray, ftot: np.ndarray, r1: np.ndarray, j1mu: np.ndarray, br2: np.ndarray,
                    bj: np.ndarray, btrf: np.ndarray) -> np.ndarray:
    """Return the augmented ``[A | rhs]`` ``(M+1, M+3)`` of the Schur complement of the stretching block."""
    m = xl.shape[0]
    um = np.uint64(m)
    eps, nu = prm[_P_EPS], prm[_P_NU]
    g = np.empty((m + 1, m + 3))
    for i in range(m):
        gi = g[i]
        ai = arm[i]
        xli = xl[i]
        bi = b[i]
        for j in range(um):
            gi[j] = -eps * xli[j] - ai * bi[j] * arm[j]
        gi[m] = j1mu[i] - ai * bj[i]
        g[m, i] = row[i] - ai * btrf[i]
        gi[m + 1] = -r1[i] - ai * br2[i]
        gi[m + 2] = 0.0
    g[0, :m] = 0.0
    if prm[_P_CLAMPED] != 0.0:
        g[0, 0] = 1.0
    else:
        for j in range(m):
            g[0, j] = d1e[j]
        g[0, 0] += nu
    for i in range(1, m):
        g[i, i] -= ftot[i]
    rf_bj = 0.0
    rf_br2 = 0.0
    for i in range(m):
        rf_bj += row[m + i] * bj[i]
        rf_br2 += row[m + i] * br2[i]
    g[m, m] = row[2 * m] - rf_bj
    g[m, m + 1] = c0 - rf_br2
    g[m, m + 2] = 1.0
    return g


@njit(cache=True)
def newton_solve(z: np.ndarray, row: np.ndarray, c0: float, prm: np.ndarray, imp: np.ndarray,
                 eig: np.ndarray, b: np.ndarray, bt: np.ndarray, x: np.ndarray, xl: np.ndarray,
                 xlt: np.ndarray, d1e: np.ndarray, sigma: np.ndarray, out: np.ndarray) -> float:
    """Linearise at ``z`` and solve ``[∂R/∂z; row] d = [−R, 0; c0, 1]`` into ``out`` ``(2M+1, 2)``.

    Returns the sign of the bordered matrix's determinant relative to the cap's fixed stretching
    block (the sign of the reduced ``(M+1)``-square system; see ``correct_one``).

    Column 0 is the Newton correction, column 1 the (unnormalised) tangent. ``bt``, ``xlt``
    are the transposes of ``b``, ``xl`` (contiguous), so that every matrix-vector product is a
    sum of vectorised row updates.
    """
    m = x.shape[0]
    arm = np.empty(m)
    ftot = np.empty(m)
    r1 = np.empty(m)
    r2 = np.empty(m)
    j1mu = np.empty(m)
    j2mu = np.empty(m)
    _residual(z, prm, imp, eig, x, xlt, d1e, sigma, arm, ftot, r1, r2, j1mu, j2mu)
    # Schur complement of the stretching block: an (M+1)-square bordered system
    br2 = np.zeros(m)
    bj = np.zeros(m)
    btrf = np.zeros(m)
    for j in range(m):
        axpy(br2, -r2[j], bt[j])
        axpy(bj, j2mu[j], bt[j])
        axpy(btrf, row[m + j], b[j])
    g = _reduced_system(row, c0, prm, b, xl, d1e, arm, ftot, r1, j1mu, br2, bj, btrf)
    orientation = lu_solve(g, m + 1, np.empty(m + 3))
    back = np.empty(m)
    for col in range(2):
        dmu = g[m, m + 1 + col]
        back[:] = 0.0
        for j in range(m):
            dyj = g[j, m + 1 + col]
            out[j, col] = dyj
            axpy(back, arm[j] * dyj, bt[j])
        for i in range(m):
            base = br2[i] if col == 0 else 0.0
            out[m + i, col] = base - back[i] - bj[i] * dmu
        out[2 * m, col] = dmu
    return orientation


@njit(cache=True)
def correct_one(anchor: np.ndarray, tangent: np.ndarray, s: float, w: np.ndarray, tol: float, max_iter: int,
                prm: np.ndarray, imp: np.ndarray, eig: np.ndarray, b: np.ndarray, bt: np.ndarray, x: np.ndarray,
             xl: np.ndarray, xlt: np.ndarray, d1e: np.ndarray, sigma: np.ndarray, z: np.ndarray,
             t_out: np.ndarray) -> tuple[bool, int, float]:
    """Newton-correct ``anchor + s·tangent`` onto the path at arclength ``s`` (one cap).

    Writes the state into ``z`` and the unit tangent into ``t_out``; returns (converged,
    iterations, orientation). Same acceptance and stopping rules as ``correct_on_arc``.

    The orientation is the sign of ``det [∂R/∂z; tᵀ]`` at the last linearisation, with ``t``
    the path's tangent oriented along ``tangent`` (the bordering row ``tangent·w`` has the same
    sign of determinant: ``det [J; r] = (r·t) det [J; tᵀ]/|t|²``). It keeps its sign along a
    regular path, through limit points too, and changes it only across a branch point: a
    step whose end has the other sign has jumped to another branch (or crossed one).
    """
    m1 = anchor.shape[0]
    for i in range(m1):
        z[i] = anchor[i] + s * tangent[i]
    row = tangent * w
    out = np.empty((m1, 2))
    dz = np.empty(m1)
    tn = np.empty(m1)
    last = np.inf
    its = 0
    orientation = 0.0
    for _ in range(max_iter):
        c0 = s
        for i in range(m1):
            c0 -= tangent[i] * (z[i] - anchor[i]) * w[i]
        orientation = newton_solve(z, row, c0, prm, imp, eig, b, bt, x, xl, xlt, d1e, sigma, out)
        for i in range(m1):
            dz[i] = out[i, 0]
            tn[i] = out[i, 1]
        size = np.sqrt(wdot(dz, dz, w))
        norm_t = np.sqrt(wdot(tn, tn, w))
        prev = last
        # a corrector that stops contracting quadratically will not recover: fail fast
        if not np.isfinite(size) or (size > 0.5 * prev + 1e-14 and its > 1):
            return False, its, orientation
        for i in range(m1):
            z[i] += dz[i]
            t_out[i] = tn[i] / norm_t
        its += 1
        last = size
        if size < tol or (np.isfinite(prev) and size**3 < tol * prev**2 and size < 1e-4):
            return True, its, orientation
    return False, its, orientation
