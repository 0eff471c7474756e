"""Pseudo-arclength continuation of the discrete strip elastica in the confinement.

Unknowns X = (φ₁..φ_N, P, R, d): segment angles, compressive force, vertical end reaction
and the geometric end-shortening per unit length beyond the imperfection's own slack.
Equations (N + 2, see :mod:`sweepshell.models.foundation_strip.elastica`):

    (∇E − P h sin φ + R h cos φ)/h = 0,
    (h Σ (1 − cos φ) − slack⁰)/L − d = 0,
    h Σ sin φ / L = 0,

closed by the pseudo-arclength condition tᵀW(X − X_pred) = 0 with the weighted norm
‖X‖²_W = mean(φ²) + P² + 100 d² (the weights make each part O(1) along a path to a
fold). The confinement (end-shortening per unit length) of an extensible strip is
c = d + s P with s = √(BK)/A the normalised stretching compliance (uniform axial strain).

The path starts from the stress-free state (P = 0), so the imperfect strip's response is
followed through its limit load and past folds in c (snap-backs) without branch
switching. A perfect strip's flat state is an equilibrium at every load, so its path
switches branches instead: at the first eigenvalue P_c of the constrained Hessian it
leaves the flat state along the critical mode (a step W-orthogonal to the trivial
branch), then watches the sign of det [J; tᵀW], which changes at each simple bifurcation
of the wrinkle branch and not at limit points; the first sign change whose bifurcating
mode keeps the wrinkle's mirror parity (the envelope localising at mid-length) is
located by bisection and switched at in the same way (the others are passed).
Every step is a plain Newton solve on a dense (N + 3) system; step lengths
adapt to the Newton iteration count. Nothing here raises on numerical trouble: the path
reports how it ended.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from sweepshell.models.foundation_strip.bordered import (
    build_weights,
    compute_jacobian,
    factor_bordered,
    get_det_sign,
    solve_newton,
    solve_tangent,
)
from sweepshell.models.foundation_strip.branches import keeps_mirror_symmetry, locate_bifurcation, switch_branch
from sweepshell.models.foundation_strip.elastica import (
    StripProblem,
    compute_crest_contrast,
    compute_critical_mode,
    compute_hessian,
    compute_node_heights,
)

__all__ = ["PathEnd", "StripPath", "follow_confinement_path", "solve_at_confinement"]


class PathEnd:
    """Why a path stopped (plain string constants)."""

    reached = "reached"  # confinement target reached (and the fold searched)
    contact = "contact"  # the strip touched itself or the force P fell to zero
    stalled = "stalled"  # Newton failed even at the smallest step
    max_steps = "max_steps"  # step budget exhausted


@dataclass
class StripPath:
    """A followed path: one entry per converged state, in path order.

    Attributes
    ----------
    confinement, load, contrast, amplitude
        c (1), P (units of √(BK)), crest contrast (1) and largest crest |y| (units of ℓ).
    states
        The converged unknowns X, shape ``(steps, N + 3)``.
    bifurcations
        Indices of the states at which the path switched branches (perfect strips only:
        the flat state at the first bifurcation, then the located secondary bifurcation).
    passed
        Confinements of the bifurcations located on the wrinkle branch of a perfect strip
        (the one switched at, and those passed because they break the mirror symmetry).
    end
        A :class:`PathEnd` value.
    """

    confinement: list[float] = field(default_factory=list)
    load: list[float] = field(default_factory=list)
    contrast: list[float] = field(default_factory=list)
    amplitude: list[float] = field(default_factory=list)
    states: list[np.ndarray] = field(default_factory=list)
    end: str = PathEnd.reached
    newton_iterations: int = 0
    bifurcations: list[int] = field(default_factory=list)
    passed: list[float] = field(default_factory=list)


def _shape_turn(t: np.ndarray, t_new: np.ndarray, n: int) -> float:
    """Cosine between the shape parts (angles) of two tangents."""
    a, b = t[:n], t_new[:n]
    na, nb = float(np.linalg.norm(a)), float(np.linalg.norm(b))
    if na == 0.0 or nb == 0.0:
        return 1.0
    return float(a @ b) / (na * nb)


def _touches(y: np.ndarray, x: np.ndarray, h: float) -> bool:
    """Whether two nodes far apart along the strip came closer than h/2."""
    pts = np.column_stack([x, y])
    deep = np.nonzero(np.abs(y) > 0.5)[0]
    if deep.size < 8:
        return False
    p = pts[deep]
    dist = np.sqrt(np.sum((p[:, None, :] - p[None, :, :]) ** 2, axis=-1))
    sep = np.abs(deep[:, None] - deep[None, :])
    return bool(np.any((dist < 0.5 * h) & (sep > 3)))


def _record(problem: StripProblem, path: StripPath, X: np.ndarray, compliance: float) -> bool:
    """Append a converged state; return whether the strip touches itself."""
    g = problem.grid
    n = g.n
    phi = X[:n]
    y = compute_node_heights(phi, g.h)
    contrast, amp = compute_crest_contrast(y)
    path.confinement.append(float(X[n + 2] + compliance * X[n]))
    path.load.append(float(X[n]))
    path.contrast.append(contrast)
    path.amplitude.append(amp)
    path.states.append(X.copy())
    x = np.concatenate(([0.0], g.h * np.cumsum(np.cos(phi))))
    return X[n] <= 0.0 or _touches(y, x, g.h)


def _start_on_wrinkled_branch(problem: StripProblem, path: StripPath, compliance: float,
                              W: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Record the flat states of a perfect strip up to its first bifurcation; return (X*, t).

    On the trivial branch (φ = 0, R = 0, d = 0) the Jacobian is singular where P is an
    eigenvalue of the constrained Hessian; its null space there is spanned by the trivial
    tangent e_P and the bifurcating direction (v, 0, R_v, 0), v the critical mode of
    :func:`compute_critical_mode` and R_v the reaction that keeps Σ v = 0. The path
    continues from X* along that direction, which is W-orthogonal to the trivial branch,
    so the first corrector cannot fall back onto it.
    """
    g = problem.grid
    n = g.n
    p_c, _, v = compute_critical_mode(problem)
    X = np.zeros(n + 3)
    _record(problem, path, X, compliance)
    X[n] = p_c
    _record(problem, path, X, compliance)
    path.bifurcations.append(1)
    Hv = compute_hessian(problem, np.zeros(n)) @ v / g.h - p_c * v
    t = np.zeros(n + 3)
    t[:n] = v
    t[n + 1] = -float(np.mean(Hv))
    return X, t / math.sqrt(float(np.sum(W * t * t)))


def follow_confinement_path(problem: StripProblem, *, compliance: float, stop, tol: float = 1e-9,
                            max_steps: int = 400, ds_first: float = 0.1, ds_max: float = 1.0,
                            ds_min: float = 1e-5, switch_step: float = 0.05,
                            watch_step: float = 0.2) -> StripPath:
    """Follow the equilibrium path from the stress-free state by pseudo-arclength continuation.

    Parameters
    ----------
    problem
        The discrete strip. A perfect strip (stress-free shape flat) switches branches
        twice: at the first bifurcation of the flat state onto the periodic wrinkle, and
        at the first bifurcation met on that wrinkle branch (where it loses stability to
        a modulated, localising wrinkle). An imperfect strip never switches.
    compliance
        s = √(BK)/A, the normalised stretching compliance (0 for an inextensible strip).
    stop
        ``stop(path) -> bool`` called after each converged state; True ends the path
        with :attr:`PathEnd.reached`.
    tol
        Newton tolerance on the update and the residual.
    max_steps, ds_first, ds_max, ds_min
        Step budget and arclength step limits (weighted norm, see module notes).
    switch_step, watch_step
        Arclength ε of the step off the wrinkle branch at its bifurcation; largest step
        along the wrinkle branch of a perfect strip.

    Returns
    -------
    StripPath
        The converged states and why the path ended.
    """
    n = problem.grid.n
    W = build_weights(n)
    path = StripPath()
    perfect = not np.any(problem.phi0) and not np.any(problem.kappa0)
    start = _start_path(problem, path, compliance, W, perfect)
    if start is None:
        path.end = PathEnd.stalled
        return path
    X, t, lu = start
    watch_sign: int | None = None
    watching = perfect
    ds = ds_first
    for _ in range(max_steps):
        if stop(path):
            path.end = PathEnd.reached
            return path
        step, ds = _corrected_step(problem, path, X, t, lu, ds, ds_min, W, tol)
        if step is None:
            path.end = PathEnd.stalled
            return path
        if watching:
            # det [J; tᵀW] keeps its sign along a branch (also through limit points) and
            # changes it at a simple bifurcation: the wrinkle branch's first one is taken
            sign = get_det_sign(step.lu)
            if watch_sign is not None and sign != watch_sign:
                stalled, switched = _at_sign_change(problem, path, X, t, ds, W, tol, compliance, switch_step)
                if stalled:
                    path.end = PathEnd.stalled
                    return path
                if switched is not None:
                    watching = False
                    step, ds = switched, ds_first / 1.6  # restart as from a fresh state
            watch_sign = sign
        lu, X, t = step.lu, step.X, step.t
        if _record(problem, path, X, compliance):
            path.end = PathEnd.contact
            return path
        grow = step.its <= 6 and step.turn >= 0.98 and step.drift <= 0.1 * ds
        # short steps while watching, so that two bifurcations never share one step
        ds = min(watch_step if watching else ds_max, ds * (1.6 if grow else (1.0 if step.its <= 10 else 0.6)))
    path.end = PathEnd.reached if stop(path) else PathEnd.max_steps
    return path


@dataclass(frozen=True)
class _Step:
    """An accepted continuation step: the new state, its unit tangent and LU factors, and how it went."""

    X: np.ndarray
    t: np.ndarray
    lu: Any
    its: int
    turn: float
    drift: float


def _start_path(problem: StripProblem, path: StripPath, compliance: float, W: np.ndarray,
                perfect: bool) -> tuple[np.ndarray, np.ndarray, Any] | None:
    """Return the first state, its tangent and LU factors (None: no tangent there)."""
    n = problem.grid.n
    if perfect:
        # the flat state is an equilibrium at every P: start at its first bifurcation
        X, t = _start_on_wrinkled_branch(problem, path, compliance, W)
        return X, t, None
    X = np.concatenate([problem.phi0, [0.0, 0.0, 0.0]])
    _record(problem, path, X, compliance)
    t = np.zeros(n + 3)
    t[n] = 1.0  # load first
    lu = factor_bordered(compute_jacobian(problem, X), t * W)
    t_maybe = None if lu is None else solve_tangent(lu, W)
    if t_maybe is None:
        return None
    return X, t_maybe, factor_bordered(compute_jacobian(problem, X), t_maybe * W)


def _corrected_step(problem: StripProblem, path: StripPath, X: np.ndarray, t: np.ndarray, lu: Any, ds: float,
                    ds_min: float, W: np.ndarray, tol: float) -> tuple[_Step | None, float]:
    """Take one predictor-corrector step from X along t, halving ``ds`` until it is accepted.

    Returns the step (None: stalled below ``ds_min``) and the step length used.
    """
    n = problem.grid.n
    while ds >= ds_min:
        X_pred = X + ds * t
        tw = t * W
        X_new, its = solve_newton(problem, X_pred, tw, float(tw @ X_pred), lu, tol, 16)
        path.newton_iterations += its
        if X_new is not None:
            lu_new = factor_bordered(compute_jacobian(problem, X_new), t * W)
            t_new = None if lu_new is None else solve_tangent(lu_new, W)
            if t_new is not None:
                turn = float(np.sum(W * t_new * t))
                if turn < 0.0:
                    t_new, turn = -t_new, -turn
                drift = math.sqrt(float(np.sum(W * (X_new - X_pred) ** 2)))
                # a sharp turn, a change of shape or a long corrector may mean the step
                # jumped to another branch (near a limit load the load barely changes while
                # the shape does, so the shape gets its own test)
                if turn >= 0.9 and _shape_turn(t, t_new, n) >= 0.8 and drift <= 0.3 * ds:
                    return _Step(X_new, t_new, lu_new, its, turn, drift), ds
        ds *= 0.5
        lu = None
    return None, ds


def _at_sign_change(problem: StripProblem, path: StripPath, X: np.ndarray, t: np.ndarray, ds: float,
                    W: np.ndarray, tol: float, compliance: float,
                    switch_step: float) -> tuple[bool, _Step | None]:
    """Handle a sign change of det [J; tᵀW] in the step from X: locate it, switch if it keeps the mirror symmetry.

    Returns (stalled, the first step on the new branch or None when the bifurcation is passed).
    """
    n = problem.grid.n
    found = locate_bifurcation(problem, X, t, ds, W, tol)
    if found is None:
        return True, None
    Xb, z = found
    path.passed.append(float(Xb[n + 2] + compliance * Xb[n]))
    if not keeps_mirror_symmetry(problem, Xb, z):
        return False, None
    switched = switch_branch(problem, Xb, z, W, tol, switch_step)
    if switched is None:
        return True, None
    X_new, t_new = switched
    _record(problem, path, Xb, compliance)
    path.bifurcations.append(len(path.load) - 1)
    return False, _Step(X_new, t_new, factor_bordered(compute_jacobian(problem, X_new), t_new * W), 0, 1.0, 0.0)


def solve_at_confinement(problem: StripProblem, path: StripPath, target: float, *, compliance: float,
                         tol: float = 1e-9) -> np.ndarray | None:
    """Return the state at confinement ``target`` on the first path segment that crosses it.

    The start is the linear interpolation between the bracketing states; Newton then
    holds c = d + sP = target. Returns None if no segment crosses ``target`` or Newton
    fails.
    """
    c = np.asarray(path.confinement)
    above = np.nonzero(c >= target)[0]
    if above.size == 0:
        return None
    j = int(above[0])
    if j == 0:
        return path.states[0].copy()
    c0, c1 = c[j - 1], c[j]
    f = 0.0 if c1 == c0 else (target - c0) / (c1 - c0)
    X0 = (1.0 - f) * path.states[j - 1] + f * path.states[j]
    n = problem.grid.n
    row = np.zeros(n + 3)
    row[n + 2] = 1.0
    row[n] = compliance

    X, _ = solve_newton(problem, X0, row, target, None, tol, 16)
    return X
