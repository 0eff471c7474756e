"""Compiled path tracing and refinement of the shallow-cap model, one cap at a time (numba).

Same algorithm as :func:`sweepshell.numerics.arclength.trace_paths` with the stopping rule of
:func:`sweepshell.models.shallow_cap.solver.solve_caps`, and as
:func:`sweepshell.numerics.arc_refine.refine_on_arc` for the measures ``t_μ`` and ``μ``, written
for one cap at a time so that a cap's whole axisymmetric path runs in compiled code. The numpy
versions stay the specification (and serve the tests that compare both); results agree to
rounding (the direct limit-point solve of :mod:`.compiled_fold`, used without the asymmetric
scan, has no numpy counterpart: it is tested against the refinement). The Newton corrector and
the packed per-cap parameters are in :mod:`.compiled_newton` (their names are explained there).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from sweepshell.models.shallow_cap.compiled_fold import FOLD_START, try_fold
from sweepshell.models.shallow_cap.compiled_newton import (
    _P_APEX,
    _P_DEFL,
    _P_FS,
    _P_KAP,
    _P_MISMATCH,
    correct_one,
    newton_solve,
    pack_cap_parameters,
    wdot,
)
from sweepshell.models.shallow_cap.kernels import CapPathProblem
from sweepshell.numerics.arclength import CROSS_STEP, TURN_SAFETY

__all__ = ["correct_caps_on_arc", "initial_tangents", "refine_caps_on_arc", "trace_cap_paths"]

_TRACE_RUNNING, _TRACE_DONE, _TRACE_STALLED, _TRACE_STEP_LIMIT = 0, 1, 2, 3


@njit(cache=True)
def _check_step(zc: np.ndarray, tc: np.ndarray, z: np.ndarray, tn: np.ndarray, h: float, w: np.ndarray,
                cos_max: float, max_drift: float) -> tuple[bool, float]:
    """Whether a converged step from ``zc`` to ``z`` is acceptable, and the cosine of its turn.

    Rejected: a turn past the limit, a load change against both tangents (a fold pair stepped
    over), or a corrector landing far from the predictor.
    """
    m1 = zc.shape[0]
    cosang = wdot(tn, tc, w)
    dmu = z[m1 - 1] - zc[m1 - 1]
    skipped = ((tc[m1 - 1] > 0 and tn[m1 - 1] > 0 and dmu < 0)
               or (tc[m1 - 1] < 0 and tn[m1 - 1] < 0 and dmu > 0))
    dd = 0.0
    for i in range(m1):
        di = z[i] - zc[i] - h * tc[i]
        dd += di * di * w[i]
    drift = np.sqrt(dd) / h
    return cosang > cos_max and not skipped and drift < max_drift, cosang


@njit(cache=True)
def _next_step(h: float, its: int, cosang: float, cos_max: float, turn_cap: float, turn_rate_prev: float,
               step_max: float) -> tuple[float, float]:
    """Return the next step length after an accepted step ``h`` and the step's turning rate."""
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
    return min(h_next, step_max), turn_rate


@njit(cache=True)
def _apex_deflection(z: np.ndarray, prm: np.ndarray, integ: np.ndarray) -> float:
    """Apex deflection over h of the state ``z``."""
    p = z[z.shape[0] - 1] * prm[_P_FS] if prm[_P_APEX] != 0.0 else 0.0
    integral = 0.0
    for i in range(integ.shape[0]):
        integral += integ[i] * z[i]
    return prm[_P_DEFL] * (integral + prm[_P_KAP] * p / 8.0)


@njit(cache=True)
def _trace(z0: np.ndarray, t0: np.ndarray, w: np.ndarray, first_step: float, max_step: float, min_step: float,
           max_points: int, max_turn_deg: float, tol: float, max_iter: int, max_drift: float, mu_max: float,
           defl_max: float, check_bi: bool, max_suction: float, prm: np.ndarray, imp: np.ndarray,
           eig: np.ndarray, b: np.ndarray, x: np.ndarray, xl: np.ndarray, d1e: np.ndarray, sigma: np.ndarray,
           integ: np.ndarray, orient_ref: float, fold_solve: bool, zh: np.ndarray, th: np.ndarray,
           sh: np.ndarray, dh: np.ndarray) -> tuple[int, int, int]:
    """Trace one cap's path into ``zh``, ``th``, ``sh`` and its apex deflections into ``dh``.

    ``orient_ref`` is the path's orientation at ``z0`` (see ``correct_one``): a step whose end has
    the other one is rejected unless shorter than ``CROSS_STEP``. ``fold_solve``: the first limit
    point is solved for from inside its corner (:func:`.compiled_fold.try_fold`), the next path
    point. Returns (accepted points, trace state, index of the solved limit point or -1).
    """
    m1 = z0.shape[0]
    zh[0], th[0], sh[0], dh[0] = z0, t0, 0.0, 0.0
    count, h, step_cap, turn_cap = 1, first_step, max_step, max_turn_deg
    fold_seen = went_negative = False
    turn_rate_prev = 0.0
    fold_at, fold_below = -1, FOLD_START if fold_solve else 0.0
    z, tn = np.empty(m1), np.empty(m1)
    bt, xlt = np.ascontiguousarray(b.T), np.ascontiguousarray(xl.T)
    while True:
        zc, tc = zh[count - 1], th[count - 1]
        cos_max = np.cos(np.radians(turn_cap))
        step_max = step_cap
        ok, its, orient = correct_one(zc, tc, h, w, tol, max_iter, prm, imp, eig, b, bt, x, xl, xlt, d1e, sigma,
                                      z, tn)
        cosang = 0.0
        if ok:
            ok, cosang = _check_step(zc, tc, z, tn, h, w, cos_max, max_drift)
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
                return count, _TRACE_STALLED, fold_at
            continue
        zh[count], th[count], sh[count] = z, tn, h
        h_last = h
        h, turn_rate_prev = _next_step(h, its, cosang, cos_max, turn_cap, turn_rate_prev, step_max)
        if fold_below > 0.0 and fold_at < 0 and not fold_seen and count + 1 < max_points:
            # inside the corner of the first limit point: solve for it directly; it follows z
            kept, dist = try_fold(z, tn, tc, h_last, w, tol, max_iter, orient_ref, fold_below, prm, imp, eig, b, bt,
                                  x, xl, xlt, d1e, sigma, zh[count + 1], th[count + 1])
            if kept:
                dh[count] = _apex_deflection(z, prm, integ)
                count += 1
                zc, tc = zh[count - 1], th[count - 1]
                z[:], tn[:], sh[count], fold_at = zh[count], th[count], dist, count
            elif 0.0 < tn[m1 - 1] < fold_below:
                fold_below = 0.7 * tn[m1 - 1]  # retried once the corner has turned further
        bracketed = tc[m1 - 1] > 0.0 and tn[m1 - 1] <= 0.0
        # stopping rule of solve_caps
        mu_n = z[m1 - 1]
        if mu_n < zc[m1 - 1]:
            fold_seen = True
        dh[count] = defl = _apex_deflection(z, prm, integ)
        count += 1
        if prm[_P_MISMATCH] != 0.0:
            defl = abs(defl)
        done = mu_n > mu_max or defl > defl_max
        if not check_bi:
            # the first limit point is bracketed as soon as dμ/ds turns non-positive
            done = done or fold_seen or bracketed
        else:
            # past the critical part the path is only searched for a return to zero load
            if fold_seen:
                step_cap, turn_cap = 2.0 * max_step, 2.0 * max_turn_deg
            if fold_seen and mu_n < 0:
                went_negative = True
            done = done or (went_negative and mu_n >= 0) or mu_n < -min(mu_max, max_suction)
        if done:
            return count, _TRACE_DONE, fold_at
        if count >= max_points:
            return count, _TRACE_STEP_LIMIT, fold_at


@njit(cache=True)
def _start(z0: np.ndarray, row: np.ndarray, w: np.ndarray, prm: np.ndarray, imp: np.ndarray, eig: np.ndarray,
           b: np.ndarray, x: np.ndarray, xl: np.ndarray, xlt: np.ndarray, d1e: np.ndarray, sigma: np.ndarray,
           t_out: np.ndarray) -> float:
    """Write the unit tangent at ``z0`` oriented along ``row`` into ``t_out``; return the orientation."""
    m1 = z0.shape[0]
    out = np.empty((m1, 2))
    orientation = newton_solve(z0.copy(), row, 0.0, prm, imp, eig, b, np.ascontiguousarray(b.T), x, xl, xlt, d1e,
                                sigma, out)
    for i in range(m1):
        t_out[i] = out[i, 1]
    norm = np.sqrt(wdot(t_out, t_out, w))
    for i in range(m1):
        t_out[i] /= norm
    return orientation


def initial_tangents(pb: CapPathProblem, z0: np.ndarray, w: np.ndarray,
                     rows: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Return the unit tangents at the states ``z0`` and the paths' orientation there.

    Tangents are oriented along ``rows`` (default: increasing load, the compiled form of
    :func:`sweepshell.numerics.arclength.compute_tangent` with ``e_μ``); the orientation is the
    sign of ``det [∂R/∂z; tᵀ]`` (see ``correct_one``).
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
                    fold_solve: bool = False,
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Trace every cap's axisymmetric path, one cap at a time in compiled code.

    ``orientation`` is each path's orientation at ``z0`` (from :func:`initial_tangents`;
    computed here when not given). With ``fold_solve`` the first limit point is solved for
    directly from inside its corner (see ``_trace``). Returns ``(z, t, step, count, state,
    deflection, fold_at)`` laid out as :class:`sweepshell.numerics.arclength.PathHistory` (rows
    past ``count`` NaN, steps 0), ``deflection`` the apex deflection over h of every point,
    ``fold_at`` the index of the solved limit point (-1: none); the history length is the
    longest path (at least ``min(max_points, 48)``).
    """
    n, m1 = z0.shape
    x, xl, d1e, sigma, integ = _shared(pb)
    prm = pack_cap_parameters(pb)
    if orientation is None:
        orientation = initial_tangents(pb, z0, w, t0 * w[None, :])[1]
    count = np.empty(n, dtype=int)
    state = np.empty(n, dtype=np.int8)
    fold_at = np.empty(n, dtype=int)
    paths = []
    zbuf = np.empty((max_points, m1))
    tbuf = np.empty((max_points, m1))
    sbuf = np.empty(max_points)
    dbuf = np.empty(max_points)
    for i in range(n):
        c, st, fold_at[i] = _trace(np.ascontiguousarray(z0[i]), np.ascontiguousarray(t0[i]), w, first_step, max_step,
                       min_step, max_points, max_turn_deg, tol, max_iter, max_drift, float(mu_max[i]),
                       float(defl_max[i]), check_bistability, max_suction, prm[i],
                       np.ascontiguousarray(pb.imperfection[i]), np.ascontiguousarray(pb.eigen_stress[i]),
                       np.ascontiguousarray(pb.stretch_inverse[i]), x, xl, d1e, sigma, integ, float(orientation[i]),
                       fold_solve, zbuf, tbuf, sbuf, dbuf)
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
    return zh, th, sh, count, state, dh, fold_at


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
        ok, it, _ = correct_one(np.ascontiguousarray(anchor[r]), np.ascontiguousarray(tangent[r]), float(s[r]), w,
                                tol, max_iter, prm[i], np.ascontiguousarray(pb.imperfection[i]),
                          np.ascontiguousarray(pb.eigen_stress[i]), np.ascontiguousarray(b),
                          np.ascontiguousarray(b.T), x, xl, xlt, d1e, sigma, z[r], tn)
        conv[r], its[r] = ok, it
        if ok:
            t[r] = tn
    return z, conv, its, t


@njit(cache=True)
def _next_point(lo: float, hi: float, glo: float, ghi: float, s_a: float, g_a: float, s_b: float,
                g_b: float) -> float:
    """Next trial arclength in the bracket ``(lo, hi)``: secant of the last two points, else regula falsi."""
    width = hi - lo
    denom = ghi - glo
    s = (lo * ghi - hi * glo) / denom if denom != 0 else 0.5 * (lo + hi)
    gd = g_b - g_a
    sec = s_b - g_b * (s_b - s_a) / gd if gd != 0 else np.nan
    if np.isfinite(sec) and sec > lo + 1e-3 * width and sec < hi - 1e-3 * width:
        return sec
    if np.isnan(s):
        s = 0.0
    return min(max(s, lo + 0.01 * width), hi - 0.01 * width)


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
        s = _next_point(lo, hi, glo, ghi, s_a, g_a, s_b, g_b)
        if abs(s - s_last) < s_tol * scale:
            break  # the next point would move less than the tolerance: keep the last one
        conv, _, _ = correct_one(anchor, tangent, s, w, tol, max_iter, prm, imp, eig, b, bt, x, xl, xlt, d1e, sigma,
                                 z, t)
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
    """Compiled :func:`sweepshell.numerics.arc_refine.refine_on_arc` for the measures ``t_μ`` and ``μ``.

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
