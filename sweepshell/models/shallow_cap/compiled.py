"""Compiled per-cap kernels of the shallow-cap model: Newton corrector and path tracing (numba).

Same equations, Jacobian and algorithm as :class:`~sweepshell.models.shallow_cap.kernels.CapPathProblem`
(residual and Schur-complement bordered solve), :func:`sweepshell.numerics.arclength.correct_on_arc`
(Newton on the pseudo-arclength bordered system, tangent as a second right-hand side) and
:func:`sweepshell.numerics.arclength.trace_paths` with the stopping rule of
:func:`sweepshell.models.shallow_cap.solver.solve_caps`, written for one cap at a time so that
a cap's whole axisymmetric path runs in compiled code. The numpy versions stay the
specification (and serve the tests that compare both); results agree to rounding.

Per-cap scalars are packed in one array ``prm`` (indices ``_P_*`` below); per-cap vectors are
the dimple slope ``imp`` and the mismatch stress ``eig`` over λ² at the nodes and the inverse
stretching block ``b``; shared by all caps of a grid: nodes ``x``, ``xl = x L`` (collocated
``x(u'' + u'/x − u/x²)``), the edge row of ``d/dx`` ``d1e``, the apex singularity ``σ`` and the
integration weights ``integ`` of ``∫₀¹ u dx``.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from sweepshell.models.shallow_cap.kernels import CapPathProblem
from sweepshell.numerics.arclength import CROSS_STEP, TURN_SAFETY

__all__ = ["assemble_reduced_stability", "correct_caps_on_arc", "initial_tangents", "pack_cap_parameters",
           "refine_caps_on_arc", "trace_cap_paths"]

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
def _wdot(a: np.ndarray, b: np.ndarray, w: np.ndarray) -> float:
    acc = 0.0
    for i in range(a.shape[0]):
        acc += a[i] * b[i] * w[i]
    return acc


@njit(cache=True)
def _lu_solve(g: np.ndarray, n: int, u: np.ndarray) -> float:
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
def _axpy(y: np.ndarray, alpha: float, v: np.ndarray) -> None:
    """``y += alpha·v`` (unsigned indices, vectorised)."""
    for j in range(np.uint64(y.shape[0])):
        y[j] += alpha * v[j]


@njit(cache=True)
def _newton_solve(z: np.ndarray, row: np.ndarray, c0: float, prm: np.ndarray, imp: np.ndarray,
                  eig: np.ndarray, b: np.ndarray, bt: np.ndarray, x: np.ndarray, xl: np.ndarray,
                  xlt: np.ndarray, d1e: np.ndarray, sigma: np.ndarray, out: np.ndarray) -> float:
    """Linearise at ``z`` and solve ``[∂R/∂z; row] d = [−R, 0; c0, 1]`` into ``out`` ``(2M+1, 2)``.

    Returns the sign of the bordered matrix's determinant relative to the cap's fixed stretching
    block (the sign of the reduced ``(M+1)``-square system; see ``_correct``).

    Column 0 is the Newton correction, column 1 the (unnormalised) tangent. ``bt``, ``xlt``
    are the transposes of ``b``, ``xl`` (contiguous), so that every matrix-vector product is a
    sum of vectorised row updates.
    """
    m = x.shape[0]
    um = np.uint64(m)
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
        _axpy(ly, z[j], xlt[j])
        _axpy(lf, z[m + j], xlt[j])
    arm = np.empty(m)
    ftot = np.empty(m)
    r1 = np.empty(m)
    r2 = np.empty(m)
    j1mu = np.empty(m)
    j2mu = np.empty(m)
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
    # Schur complement of the stretching block: an (M+1)-square bordered system
    br2 = np.zeros(m)
    bj = np.zeros(m)
    btrf = np.zeros(m)
    for j in range(m):
        _axpy(br2, -r2[j], bt[j])
        _axpy(bj, j2mu[j], bt[j])
        _axpy(btrf, row[m + j], b[j])
    # augmented [A | rhs] with two right-hand sides
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
    if clamped:
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
    orientation = _lu_solve(g, m + 1, np.empty(m + 3))
    back = np.empty(m)
    for col in range(2):
        dmu = g[m, m + 1 + col]
        back[:] = 0.0
        for j in range(m):
            dyj = g[j, m + 1 + col]
            out[j, col] = dyj
            _axpy(back, arm[j] * dyj, bt[j])
        for i in range(m):
            base = br2[i] if col == 0 else 0.0
            out[m + i, col] = base - back[i] - bj[i] * dmu
        out[2 * m, col] = dmu
    return orientation


@njit(cache=True)
def _correct(anchor: np.ndarray, tangent: np.ndarray, s: float, w: np.ndarray, tol: float, max_iter: int,
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
        orientation = _newton_solve(z, row, c0, prm, imp, eig, b, bt, x, xl, xlt, d1e, sigma, out)
        for i in range(m1):
            dz[i] = out[i, 0]
            tn[i] = out[i, 1]
        size = np.sqrt(_wdot(dz, dz, w))
        norm_t = np.sqrt(_wdot(tn, tn, w))
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


@njit(cache=True)
def _trace(z0: np.ndarray, t0: np.ndarray, w: np.ndarray, first_step: float, max_step: float, min_step: float,
           max_points: int, max_turn_deg: float, tol: float, max_iter: int, max_drift: float, mu_max: float,
           defl_max: float, check_bi: bool, max_suction: float, prm: np.ndarray, imp: np.ndarray,
           eig: np.ndarray, b: np.ndarray, x: np.ndarray, xl: np.ndarray, d1e: np.ndarray, sigma: np.ndarray,
           integ: np.ndarray, orient_ref: float, zh: np.ndarray, th: np.ndarray, sh: np.ndarray,
           dh: np.ndarray) -> tuple[int, int]:
    """Trace one cap's path into ``zh``, ``th``, ``sh`` and its apex deflections into ``dh``.

    ``orient_ref`` is the path's orientation at ``z0`` (see ``_correct``): a step whose end has
    the other one is rejected unless shorter than ``CROSS_STEP``. Returns (accepted points,
    trace state).
    """
    m1 = z0.shape[0]
    m = x.shape[0]
    zh[0] = z0
    th[0] = t0
    sh[0] = 0.0
    dh[0] = 0.0
    count = 1
    h = first_step
    step_cap = max_step
    turn_cap = max_turn_deg
    fold_seen = False
    went_negative = False
    turn_rate_prev = 0.0
    apex = prm[_P_APEX] != 0.0
    eigen = prm[_P_MISMATCH] != 0.0
    z = np.empty(m1)
    tn = np.empty(m1)
    bt = np.ascontiguousarray(b.T)
    xlt = np.ascontiguousarray(xl.T)
    while True:
        zc = zh[count - 1]
        tc = th[count - 1]
        cos_max = np.cos(np.radians(turn_cap))
        step_max = step_cap
        conv, its, orient = _correct(zc, tc, h, w, tol, max_iter, prm, imp, eig, b, bt, x, xl, xlt, d1e, sigma, z,
                                     tn)
        ok = conv
        cosang = 0.0
        if ok:
            cosang = _wdot(tn, tc, w)
            dmu = z[m1 - 1] - zc[m1 - 1]
            skipped = ((tc[m1 - 1] > 0 and tn[m1 - 1] > 0 and dmu < 0)
                       or (tc[m1 - 1] < 0 and tn[m1 - 1] < 0 and dmu > 0))
            dd = 0.0
            for i in range(m1):
                di = z[i] - zc[i] - h * tc[i]
                dd += di * di * w[i]
            drift = np.sqrt(dd) / h
            ok = cosang > cos_max and not skipped and drift < max_drift
            if ok and orient != orient_ref:
                # another branch, reached across (or past) a branch point: near a branch point
                # of this path the two meet within a step, so only tiny steps may cross
                if h > CROSS_STEP:
                    ok = False
                else:
                    orient_ref = orient
        if not ok:
            h *= 0.5
            if h < min_step:
                return count, _TRACE_STALLED
            continue
        zh[count] = z
        th[count] = tn
        sh[count] = h
        bracketed = tc[m1 - 1] > 0.0 and tn[m1 - 1] <= 0.0
        grow = 1.6 if its <= 2 else (1.25 if its <= 3 else (1.0 if its <= 5 else 0.7))
        # a strongly turning path gets shorter steps before the angle test rejects them
        if cosang < 0.5 * (1.0 + cos_max):
            grow = min(grow, 0.8)
        h_next = h * grow
        # turning rate (radians per arclength): near limit points it grows fast, so the next step is
        # sized for the rate extrapolated by its last growth factor (avoids most angle rejections)
        turn_rate = np.arccos(min(max(cosang, -1.0), 1.0)) / h
        predicted = turn_rate * max(1.0, turn_rate / turn_rate_prev) if turn_rate_prev > 0.0 else turn_rate
        if predicted > 0.0:
            h_next = min(h_next, TURN_SAFETY * np.radians(turn_cap) / predicted)
        turn_rate_prev = turn_rate
        h = min(h_next, step_max)
        # stopping rule of solve_caps (is_finished)
        mu_p = zc[m1 - 1]
        mu_n = z[m1 - 1]
        if mu_n < mu_p:
            fold_seen = True
        p = mu_n * prm[_P_FS] if apex else 0.0
        integral = 0.0
        for i in range(m):
            integral += integ[i] * z[i]
        defl = prm[_P_DEFL] * (integral + prm[_P_KAP] * p / 8.0)
        dh[count] = defl
        count += 1
        if eigen:
            defl = abs(defl)
        done = mu_n > mu_max or defl > defl_max
        if not check_bi:
            # the first limit point is bracketed as soon as dμ/ds turns non-positive
            done = done or fold_seen or bracketed
        else:
            # past the critical part the path is only searched for a return to zero load
            if fold_seen:
                step_cap = 2.0 * max_step
                turn_cap = 2.0 * max_turn_deg
            if fold_seen and mu_n < 0:
                went_negative = True
            done = done or (went_negative and mu_n >= 0) or mu_n < -min(mu_max, max_suction)
        if done:
            return count, _TRACE_DONE
        if count >= max_points:
            return count, _TRACE_STEP_LIMIT


@njit(cache=True)
def _start(z0: np.ndarray, row: np.ndarray, w: np.ndarray, prm: np.ndarray, imp: np.ndarray, eig: np.ndarray,
           b: np.ndarray, x: np.ndarray, xl: np.ndarray, xlt: np.ndarray, d1e: np.ndarray, sigma: np.ndarray,
           t_out: np.ndarray) -> float:
    """Write the unit tangent at ``z0`` oriented along ``row`` into ``t_out``; return the orientation."""
    m1 = z0.shape[0]
    out = np.empty((m1, 2))
    orientation = _newton_solve(z0.copy(), row, 0.0, prm, imp, eig, b, np.ascontiguousarray(b.T), x, xl, xlt, d1e,
                                sigma, out)
    for i in range(m1):
        t_out[i] = out[i, 1]
    norm = np.sqrt(_wdot(t_out, t_out, w))
    for i in range(m1):
        t_out[i] /= norm
    return orientation


def initial_tangents(pb: CapPathProblem, z0: np.ndarray, w: np.ndarray,
                     rows: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Return the unit tangents at the states ``z0`` and the paths' orientation there.

    Tangents are oriented along ``rows`` (default: increasing load, the compiled form of
    :func:`sweepshell.numerics.arclength.compute_tangent` with ``e_μ``); the orientation is the
    sign of ``det [∂R/∂z; tᵀ]`` (see ``_correct``).
    """
    n, m1 = z0.shape
    x, xl, d1e, sigma, _ = _shared(pb)
    prm = pack_cap_parameters(pb)
    if rows is None:
        rows = np.zeros((n, m1))
        rows[:, -1] = w[-1]
    t = np.empty((n, m1))
    orientation = np.empty(n)
    xlt = np.ascontiguousarray(xl.T)
    for i in range(n):
        orientation[i] = _start(np.ascontiguousarray(z0[i]), np.ascontiguousarray(rows[i]), w, prm[i],
                                np.ascontiguousarray(pb.imperfection[i]), np.ascontiguousarray(pb.eigen_stress[i]),
                                np.ascontiguousarray(pb.stretch_inverse[i]), x, xl, xlt, d1e, sigma, t[i])
    return t, orientation


def _shared(pb: CapPathProblem) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    g = pb.grid
    return (np.ascontiguousarray(g.x), np.ascontiguousarray(pb.xl), np.ascontiguousarray(g.d1[-1][0]),
            np.ascontiguousarray(pb.sigma), np.ascontiguousarray(g.integral[-1]))


def trace_cap_paths(pb: CapPathProblem, z0: np.ndarray, t0: np.ndarray, w: np.ndarray, *, first_step: float,
                    max_step: float, min_step: float, max_points: int, max_turn_deg: float, tol: float,
                    max_iter: int, mu_max: np.ndarray, defl_max: np.ndarray, check_bistability: bool,
                    max_suction: float, max_drift: float = 0.2, orientation: np.ndarray | None = None,
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Trace every cap's axisymmetric path, one cap at a time in compiled code.

    ``orientation`` is each path's orientation at ``z0`` (from :func:`initial_tangents`;
    computed here when not given). Returns ``(z, t, step, count, state, deflection)`` laid out
    as :class:`sweepshell.numerics.arclength.PathHistory` (rows past ``count`` NaN, steps 0),
    ``deflection`` the apex deflection over h of every point; the history length is the
    longest path (at least ``min(max_points, 48)``).
    """
    n, m1 = z0.shape
    x, xl, d1e, sigma, integ = _shared(pb)
    prm = pack_cap_parameters(pb)
    if orientation is None:
        orientation = initial_tangents(pb, z0, w, t0 * w[None, :])[1]
    count = np.empty(n, dtype=int)
    state = np.empty(n, dtype=np.int8)
    paths = []
    zbuf = np.empty((max_points, m1))
    tbuf = np.empty((max_points, m1))
    sbuf = np.empty(max_points)
    dbuf = np.empty(max_points)
    for i in range(n):
        c, st = _trace(np.ascontiguousarray(z0[i]), np.ascontiguousarray(t0[i]), w, first_step, max_step,
                       min_step, max_points, max_turn_deg, tol, max_iter, max_drift, float(mu_max[i]),
                       float(defl_max[i]), check_bistability, max_suction, prm[i],
                       np.ascontiguousarray(pb.imperfection[i]), np.ascontiguousarray(pb.eigen_stress[i]),
                       np.ascontiguousarray(pb.stretch_inverse[i]), x, xl, d1e, sigma, integ, float(orientation[i]),
                       zbuf, tbuf, sbuf, dbuf)
        count[i], state[i] = c, st
        paths.append((zbuf[:c].copy(), tbuf[:c].copy(), sbuf[:c].copy(), dbuf[:c].copy()))
    cap = max(min(max_points, 48), int(count.max()) if n else 0)
    zh = np.full((n, cap, m1), np.nan)
    th = np.full((n, cap, m1), np.nan)
    sh = np.zeros((n, cap))
    dh = np.full((n, cap), np.nan)
    for i, (zp, tp, sp, dp) in enumerate(paths):
        c = zp.shape[0]
        zh[i, :c], th[i, :c], sh[i, :c], dh[i, :c] = zp, tp, sp, dp
    return zh, th, sh, count, state, dh


def correct_caps_on_arc(pb: CapPathProblem, anchor: np.ndarray, tangent: np.ndarray, s: np.ndarray,
                        idx: np.ndarray, w: np.ndarray, *, tol: float,
                        max_iter: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Compiled drop-in for :func:`sweepshell.numerics.arclength.correct_on_arc` on cap problems.

    Returns ``(z, converged, iterations, t)`` with ``t`` NaN where not converged.
    """
    k, m1 = anchor.shape
    x, xl, d1e, sigma, _ = _shared(pb)
    prm = pack_cap_parameters(pb)
    z = np.empty((k, m1))
    t = np.full((k, m1), np.nan)
    conv = np.zeros(k, dtype=bool)
    its = np.zeros(k, dtype=int)
    tn = np.empty(m1)
    xlt = np.ascontiguousarray(xl.T)
    for r in range(k):
        i = int(idx[r])
        b = pb.stretch_inverse[i]
        ok, it, _ = _correct(np.ascontiguousarray(anchor[r]), np.ascontiguousarray(tangent[r]), float(s[r]), w, tol,
                          max_iter, prm[i], np.ascontiguousarray(pb.imperfection[i]),
                          np.ascontiguousarray(pb.eigen_stress[i]), np.ascontiguousarray(b),
                          np.ascontiguousarray(b.T), x, xl, xlt, d1e, sigma, z[r], tn)
        conv[r], its[r] = ok, it
        if ok:
            t[r] = tn
    return z, conv, its, t


@njit(cache=True)
def assemble_reduced_stability(bilap: np.ndarray, bracket: np.ndarray, w2: np.ndarray, w0e: np.ndarray,
                               w1e: np.ndarray, w2e: np.ndarray, x: np.ndarray, reduction: np.ndarray,
                               group: np.ndarray, f: np.ndarray, df: np.ndarray, zeta1: np.ndarray,
                               zeta2: np.ndarray, nu: np.ndarray, clamped: np.ndarray, immovable: np.ndarray,
                               keep_row1: bool) -> np.ndarray:
    """Return the reduced stability matrices ``A − B S⁻¹ C`` ``(k, M, M)`` of one wave number.

    Compiled form of ``shallow_cap_modes._deflection_blocks`` and the stress elimination of
    ``_reduced_matrices`` (same formulas, fused per state). ``bilap``, ``bracket``, ``w2`` are
    the deflection operators, ``w0e``, ``w1e``, ``w2e`` their edge rows; ``reduction[g]`` is
    ``[P₁; P₂] S⁻¹`` of the state's (ν, in-plane edge) group ``group[p]``; ``keep_row1``:
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
        red = reduction[group[p]]
        for j in range(m):
            g[0, j] = 0.0
            g[1, j] = 0.0
        for i in range(2, m):
            z2i = zeta2[p, i]
            xz1i = x[i] * zeta1[p, i]
            for j in range(m):
                g[i, j] = z2i * red[i, j] + xz1i * red[m + i, j]
        a += np.dot(g, c)
    return out


@njit(cache=True)
def _refine(anchor: np.ndarray, tangent: np.ndarray, s_hi: float, g_lo: float, g_hi: float, use_load: bool,
            w: np.ndarray, tol: float, max_iter: int, iterations: int, s_tol: float, prm: np.ndarray,
            imp: np.ndarray, eig: np.ndarray, b: np.ndarray, bt: np.ndarray, x: np.ndarray, xl: np.ndarray,
            xlt: np.ndarray, d1e: np.ndarray, sigma: np.ndarray, z_best: np.ndarray,
            t_best: np.ndarray) -> tuple[float, bool]:
    """One cap of ``refine_on_arc`` with the measure ``t_μ`` (fold) or ``μ`` (``use_load``).

    Writes the refined state and tangent into ``z_best``, ``t_best``; returns (s, ok).
    """
    m1 = anchor.shape[0]
    lo = 0.0
    hi = s_hi
    glo = g_lo
    ghi = g_hi
    side = 0
    s_a = g_a = s_b = g_b = s_last = np.nan
    z = np.empty(m1)
    t = np.empty(m1)
    scale = max(s_hi, 1e-300)
    for _ in range(iterations):
        width = hi - lo
        denom = ghi - glo
        s = (lo * ghi - hi * glo) / denom if denom != 0 else 0.5 * (lo + hi)
        gd = g_b - g_a
        sec = s_b - g_b * (s_b - s_a) / gd if gd != 0 else np.nan
        if np.isfinite(sec) and sec > lo + 1e-3 * width and sec < hi - 1e-3 * width:
            s = sec
        else:
            if np.isnan(s):
                s = 0.0
            s = min(max(s, lo + 0.01 * width), hi - 0.01 * width)
        if abs(s - s_last) < s_tol * scale:
            break  # the next point would move less than the tolerance: keep the last one
        conv, _, _ = _correct(anchor, tangent, s, w, tol, max_iter, prm, imp, eig, b, bt, x, xl, xlt, d1e, sigma, z,
                              t)
        if not conv:
            s_out = s_last if np.isfinite(s_last) else 0.5 * (lo + hi)
            return s_out, False
        g = z[m1 - 1] if use_load else t[m1 - 1]
        z_best[:] = z
        t_best[:] = t
        s_a, g_a = s_b, g_b
        s_b, g_b = s, g
        moved = abs(s - s_last)
        s_last = s
        if np.sign(g) == np.sign(glo):
            # Illinois: halve the stale end's value when the same end moves twice
            if side == -1:
                ghi *= 0.5
            lo, glo, side = s, g, -1
        else:
            if side == 1:
                glo *= 0.5
            hi, ghi, side = s, g, 1
        if (hi - lo) < s_tol * scale or moved < s_tol * scale or g == 0.0:
            break
    s_out = s_last if np.isfinite(s_last) else 0.5 * (lo + hi)
    return s_out, True


def refine_caps_on_arc(pb: CapPathProblem, anchor: np.ndarray, tangent: np.ndarray, s_hi: np.ndarray,
                       g_lo: np.ndarray, g_hi: np.ndarray, idx: np.ndarray, w: np.ndarray, *, use_load: bool,
                       tol: float, max_iter: int, iterations: int, s_tol: float,
                       ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Compiled :func:`sweepshell.numerics.arclength.refine_on_arc` for the measures ``t_μ`` and ``μ``.

    ``use_load`` False refines a limit point (zero of the tangent's load component), True a
    return to zero load. Same results as the numpy function with that measure.
    """
    k, m1 = anchor.shape
    x, xl, d1e, sigma, _ = _shared(pb)
    xlt = np.ascontiguousarray(xl.T)
    prm = pack_cap_parameters(pb)
    z = np.full((k, m1), np.nan)
    t = np.full((k, m1), np.nan)
    s = np.empty(k)
    ok = np.zeros(k, dtype=bool)
    for r in range(k):
        i = int(idx[r])
        b = pb.stretch_inverse[i]
        s[r], ok[r] = _refine(np.ascontiguousarray(anchor[r]), np.ascontiguousarray(tangent[r]), float(s_hi[r]),
                              float(g_lo[r]), float(g_hi[r]), use_load, w, tol, max_iter, iterations, s_tol,
                              prm[i], np.ascontiguousarray(pb.imperfection[i]),
                              np.ascontiguousarray(pb.eigen_stress[i]), np.ascontiguousarray(b),
                              np.ascontiguousarray(b.T), x, xl, xlt, d1e, sigma, z[r], t[r])
    return z, t, s, ok
