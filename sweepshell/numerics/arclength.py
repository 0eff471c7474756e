"""Batched pseudo-arclength continuation with fold detection and refinement (numpy only).

Many small problems ``R(z) = 0``, ``z = (u, μ)`` with ``u ∈ R^m`` and one load parameter ``μ``,
are continued in lock-step: every problem takes its own steps (own step length, own
acceptance), and the arrays only share the loop. Converged or finished problems are frozen
by masks, so a problem's answer never depends on which others share the batch.

The corrector solves the bordered system (Keller 1977, pseudo-arclength)::

    R(z) = 0,    tᵀ W (z − z_k) = s,

with ``t`` the unit tangent at the anchor ``z_k`` in the weighted norm ``‖v‖² = Σ w_i v_i²``.
A fold (limit point) of ``μ`` is where the tangent's ``μ`` component changes sign; it is
refined by regula falsi (Illinois variant) on that component along the arc
(:func:`sweepshell.numerics.arc_refine.refine_on_arc`).

A problem is any object with ``linearize(z, idx) -> (R, lin)`` where ``z`` is ``(k, m+1)``,
``idx`` the ``(k,)`` problem indices, ``R`` is ``(k, m)`` and ``lin.solve_bordered(row, r, c)``
solves the bordered systems ``[∂R/∂z; row] d = [r; c]`` (``row`` ``(k, m+1)``, ``r`` ``(k, m)``,
``c`` ``(k,)``), so that a model can exploit the structure of its Jacobian.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Protocol

import numpy as np

__all__ = [
    "CROSS_STEP",
    "TRACE_DONE",
    "TRACE_RUNNING",
    "TRACE_STALLED",
    "TRACE_STEP_LIMIT",
    "TURN_SAFETY",
    "ContinuationProblem",
    "PathHistory",
    "compute_tangent",
    "correct_on_arc",
    "trace_paths",
]

TRACE_RUNNING = 0
TRACE_DONE = 1
TRACE_STALLED = 2  # step length fell below its minimum: Newton kept failing
TRACE_STEP_LIMIT = 3
# steps are sized for this share of the turn limit at the extrapolated turning rate (the measurements
# behind the choice: models/shallow_cap/theory.md)
TURN_SAFETY = 0.6
# a step that changes the path's orientation (see trace_paths) is accepted only when shorter
CROSS_STEP = 4e-7


class BorderedSolver(Protocol):
    def solve_bordered(self, row: np.ndarray, r: np.ndarray, c: np.ndarray) -> np.ndarray:
        ...  # pragma: no cover - protocol


class ContinuationProblem(Protocol):
    def linearize(self, z: np.ndarray, idx: np.ndarray) -> tuple[np.ndarray, BorderedSolver]:
        ...  # pragma: no cover - protocol


@dataclass
class PathHistory:
    """Accepted points of every path.

    Attributes
    ----------
    z, t
        ``(n, S, m+1)`` states and unit tangents; rows past ``count`` are NaN.
    step
        ``(n, S)`` arclength from the previous accepted point (0 for the first).
    count
        ``(n,)`` number of accepted points.
    state
        ``(n,)`` one of ``TRACE_DONE``, ``TRACE_STALLED``, ``TRACE_STEP_LIMIT``.
    """

    z: np.ndarray
    t: np.ndarray
    step: np.ndarray
    count: np.ndarray
    state: np.ndarray


def _wdot(a: np.ndarray, b: np.ndarray, w: np.ndarray) -> np.ndarray:
    return np.einsum("ki,ki,i->k", a, b, w)


def compute_tangent(lin: BorderedSolver, t_prev: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Return unit tangents ``t`` with ``(∂R/∂z) t = 0`` oriented along ``t_prev``.

    Parameters
    ----------
    lin
        Linearisation at the states (from ``problem.linearize``).
    t_prev
        ``(k, m+1)`` previous tangents (orientation and bordering row).
    w
        ``(m+1,)`` norm weights.
    """
    k, m1 = t_prev.shape
    t = lin.solve_bordered(t_prev * w, np.zeros((k, m1 - 1)), np.ones(k))
    with np.errstate(invalid="ignore", divide="ignore"):
        t /= np.sqrt(_wdot(t, t, w))[:, None]
    return t


def correct_on_arc(problem: ContinuationProblem, anchor: np.ndarray, tangent: np.ndarray,
                   s: np.ndarray, idx: np.ndarray, w: np.ndarray, *, tol: float,
                   max_iter: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Newton-correct predictor ``anchor + s·tangent`` onto ``R = 0`` at arclength ``s``.

    Every Newton solve carries a second right-hand side ``(0, 1)``: with the same bordered
    matrix it gives the unit tangent at the iterate, so a converged point needs no extra
    factorisation for its tangent (it is the tangent at the last-but-one iterate, within the
    Newton tolerance of the converged state).

    Returns
    -------
    z, converged, iterations, t
        Corrected states ``(k, m+1)``, a bool mask, the Newton iterations used ``(k,)`` and
        the unit tangents oriented along ``tangent`` (NaN where not converged).
    """
    z = anchor + s[:, None] * tangent
    k, m1 = z.shape
    t_out = np.full_like(z, np.nan)
    conv = np.zeros(k, dtype=bool)
    alive = np.ones(k, dtype=bool)
    its = np.zeros(k, dtype=int)
    last = np.full(k, np.inf)
    for _ in range(max_iter):
        act = np.nonzero(alive & ~conv)[0]
        if act.size == 0:
            break
        r, lin = problem.linearize(z[act], idx[act])
        rhs = np.zeros((act.size, m1 - 1, 2))
        rhs[:, :, 0] = -r
        cc = np.empty((act.size, 2))
        cc[:, 0] = s[act] - _wdot(tangent[act], z[act] - anchor[act], w)
        cc[:, 1] = 1.0
        with np.errstate(all="ignore"):
            both = lin.solve_bordered(tangent[act] * w, rhs, cc)
            dz = both[..., 0]
            tn = both[..., 1]
            size = np.sqrt(_wdot(dz, dz, w))
            tn /= np.sqrt(_wdot(tn, tn, w))[:, None]
        prev = last[act]
        # a corrector that stops contracting quadratically will not recover: fail fast, the
        # caller shortens the step
        bad = ~np.isfinite(size) | ((size > 0.5 * prev + 1e-14) & (its[act] > 1))
        alive[act[bad]] = False
        good = act[~bad]
        z[good] += dz[~bad]
        t_out[good] = tn[~bad]
        its[good] += 1
        last[good] = size[~bad]
        # quadratic convergence: the next correction would be about size³/prev², so the state
        # is already within tol when that is below tol
        sz, pv = size[~bad], prev[~bad]
        with np.errstate(all="ignore"):
            done = (sz < tol) | (np.isfinite(pv) & (sz**3 < tol * pv**2) & (sz < 1e-4))
        conv[good[done]] = True
    return z, conv, its, t_out


def _grow_history(zh: np.ndarray, th: np.ndarray, sh: np.ndarray,
                  grow_to: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """Return the path histories extended to ``grow_to`` points (new rows NaN, steps 0)."""
    n, cap, m1 = zh.shape
    zh = np.concatenate([zh, np.full((n, grow_to - cap, m1), np.nan)], axis=1)
    th = np.concatenate([th, np.full((n, grow_to - cap, m1), np.nan)], axis=1)
    sh = np.concatenate([sh, np.zeros((n, grow_to - cap))], axis=1)
    return zh, th, sh, grow_to


def _screen_steps(zc: np.ndarray, tc: np.ndarray, z: np.ndarray, tn: np.ndarray, conv: np.ndarray,
                  h: np.ndarray, w: np.ndarray, cos_max: np.ndarray,
                  max_drift: float) -> tuple[np.ndarray, np.ndarray]:
    """Return which corrected steps are acceptable and the cosine of each step's turn.

    ``tn`` of failed corrections is zeroed in place.
    """
    ok = conv.copy()
    tn[~ok] = 0.0
    with np.errstate(invalid="ignore"):
        cosang = _wdot(tn, tc, w)
    dmu = z[:, -1] - zc[:, -1]
    # both ends rising (or falling) but the load moved the other way: a fold pair was skipped
    skipped = ((tc[:, -1] > 0) & (tn[:, -1] > 0) & (dmu < 0)) | ((tc[:, -1] < 0) & (tn[:, -1] < 0) & (dmu > 0))
    # the corrector landing far from the predictor means the path curves within the step
    # more than the end tangents show (e.g. a fold pair inside it): shorten the step
    with np.errstate(invalid="ignore"):
        drift = np.sqrt(_wdot(z - zc - h[:, None] * tc, z - zc - h[:, None] * tc, w)) / h
    ok &= (cosang > cos_max) & ~skipped & (drift < max_drift)
    return ok, cosang


def _next_steps(h: np.ndarray, its: np.ndarray, cosang: np.ndarray, cos_max: np.ndarray, prev: np.ndarray,
                step_max: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Return the next step lengths after accepted steps ``h`` and the steps' turning rates."""
    grow = np.where(its <= 2, 1.6, np.where(its <= 3, 1.25, np.where(its <= 5, 1.0, 0.7)))
    # a strongly turning path gets shorter steps before the angle test rejects them
    grow = np.where(cosang < 0.5 * (1.0 + cos_max), np.minimum(grow, 0.8), grow)
    h_next = h * grow
    # turning rate (radians per arclength): near limit points it grows fast, so the next step is
    # sized for the rate extrapolated by its last growth factor (avoids most angle rejections)
    rate = np.arccos(np.clip(cosang, -1.0, 1.0)) / h
    with np.errstate(divide="ignore", invalid="ignore"):
        predicted = np.where(prev > 0.0, rate * np.maximum(1.0, rate / prev), rate)
        limit = np.where(predicted > 0.0, TURN_SAFETY * np.arccos(cos_max) / predicted, np.inf)
    return np.minimum(np.minimum(h_next, limit), step_max), rate


def _keep_orientation(orientation: Callable[[np.ndarray, np.ndarray, np.ndarray], np.ndarray],
                      orient_ref: np.ndarray, act: np.ndarray, z: np.ndarray, rows: np.ndarray, idx: np.ndarray,
                      ok: np.ndarray, long_step: np.ndarray) -> np.ndarray:
    """Return which accepted steps keep their path's orientation; record crossings of own branch points.

    A long step that flips the orientation has jumped to another branch; a short one
    (not ``long_step``) crosses a branch point of its own path, whose new sign is kept in
    ``orient_ref``.
    """
    sign = orient_ref[act].copy()
    sign[ok] = orientation(z[ok], rows[ok], idx[ok])
    flipped = ok & (sign != orient_ref[act])
    jumped = flipped & long_step
    crossed = flipped & ~jumped
    orient_ref[act[crossed]] = sign[crossed]
    return ~jumped


def trace_paths(problem: ContinuationProblem, z0: np.ndarray, t0: np.ndarray, idx: np.ndarray,
                w: np.ndarray, *, first_step: float, max_step: float | np.ndarray, min_step: float,
                max_points: int, max_angle_deg: float | np.ndarray, tol: float, max_iter: int,
                max_drift: float = 0.2,
                is_finished: Callable[[np.ndarray, np.ndarray, np.ndarray, np.ndarray], np.ndarray],
                orientation: Callable[[np.ndarray, np.ndarray, np.ndarray], np.ndarray] | None = None,
                cross_step: float = CROSS_STEP,
                ) -> PathHistory:
    """Continue every path from ``z0`` along ``t0`` until ``is_finished`` says so.

    Parameters
    ----------
    z0, t0
        ``(n, m+1)`` start states and unit tangents (``μ`` component positive to load up).
    idx
        ``(n,)`` problem indices passed to ``problem.evaluate``.
    w
        ``(m+1,)`` norm weights.
    first_step, max_step, min_step
        Arclength steps in the weighted norm. ``max_step`` (and ``max_angle_deg``) may be
        ``(n,)`` arrays that ``is_finished`` changes as paths progress (read every step).
    max_points
        Capacity of the history; a path that fills it ends with ``TRACE_STEP_LIMIT``.
    max_angle_deg
        Largest accepted turn of the tangent per step; larger turns halve the step, so a
        sharp double fold is never stepped over. Steps are sized for ``TURN_SAFETY`` of it at
        the turning rate extrapolated from the last two steps.
    max_drift
        Largest accepted distance between the corrected point and the predictor, over the
        step: a corrector that converges far off the predicted point may have jumped across a
        fold pair whose end tangents look parallel.
    is_finished
        ``f(z_prev, z_new, t_new, rows) -> bool mask``: whether each path just accepted its
        last point (``rows`` are the path numbers 0…n-1).
    orientation
        ``f(z, row, idx) -> signs``: the sign of ``det [∂R/∂z; row]`` (up to a constant sign
        per problem): with the bordering row ``t·w`` the path's orientation, constant along a
        regular path (through limit points too) and changing only across a branch point
        (Keller 1977). A step that changes it has jumped to a neighbouring branch (across the
        corner of a nearly broken symmetry) and is rejected unless shorter than ``cross_step``
        (then it crosses a branch point of its own path). None: no such test.
    """
    n, m1 = z0.shape
    # the history grows on demand: most paths need a few dozen points, not max_points
    cap = min(max_points, 48)
    zh = np.full((n, cap, m1), np.nan)
    th = np.full((n, cap, m1), np.nan)
    sh = np.zeros((n, cap))
    zh[:, 0], th[:, 0] = z0, t0
    count = np.ones(n, dtype=int)
    state = np.full(n, TRACE_RUNNING, dtype=np.int8)
    h, turn_rate, rows_all = np.full(n, float(first_step)), np.zeros(n), np.arange(n)
    orient_ref = None if orientation is None else orientation(z0, t0 * w, idx)
    while True:
        act = np.nonzero(state == TRACE_RUNNING)[0]
        if act.size == 0:
            break
        if count[act].max() >= cap:
            zh, th, sh, cap = _grow_history(zh, th, sh, min(max_points, 2 * cap))
        zc, tc = zh[act, count[act] - 1], th[act, count[act] - 1]
        cos_max = np.cos(np.radians(np.broadcast_to(max_angle_deg, (n,))[act]))
        step_max = np.broadcast_to(max_step, (n,))[act]
        z, conv, its, tn = correct_on_arc(problem, zc, tc, h[act], idx[act], w, tol=tol, max_iter=max_iter)
        ok, cosang = _screen_steps(zc, tc, z, tn, conv, h[act], w, cos_max, max_drift)
        if orientation is not None and orient_ref is not None and ok.any():
            ok &= _keep_orientation(orientation, orient_ref, act, z, tc * w, idx[act], ok, h[act] > cross_step)
        rej = act[~ok]
        h[rej] *= 0.5
        state[rej[h[rej] < min_step]] = TRACE_STALLED
        acc = act[ok]
        if acc.size:
            c = count[acc]
            zh[acc, c], th[acc, c], sh[acc, c] = z[ok], tn[ok], h[acc]
            count[acc] += 1
            h[acc], turn_rate[acc] = _next_steps(h[acc], its[ok], cosang[ok], cos_max[ok], turn_rate[acc],
                                                 step_max[ok])
            fin = is_finished(zc[ok], z[ok], tn[ok], rows_all[acc])
            state[acc[fin]] = TRACE_DONE
            state[acc[(count[acc] >= max_points) & ~fin]] = TRACE_STEP_LIMIT
    return PathHistory(z=zh, t=th, step=sh, count=count, state=state)
