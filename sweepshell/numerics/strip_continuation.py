"""Pseudo-arclength continuation of the discrete strip elastica in the confinement.

Unknowns X = (φ₁..φ_N, P, R, d): segment angles, compressive force, vertical end reaction
and the geometric end-shortening per unit length beyond the imperfection's own slack.
Equations (N + 2, see :mod:`sweepshell.numerics.strip_elastica`):

    (∇E − P h sin φ + R h cos φ)/h = 0,
    (h Σ (1 − cos φ) − slack⁰)/L − d = 0,
    h Σ sin φ / L = 0,

closed by the pseudo-arclength condition tᵀW(X − X_pred) = 0 with the weighted norm
‖X‖²_W = mean(φ²) + P² + 100 d² (the weights make each part O(1) along a path to a
fold). The confinement (end-shortening per unit length) of an extensible strip is
c = d + s P with s = √(BK)/A the normalised stretching compliance (uniform axial strain).

The path starts from the stress-free state (P = 0), so the imperfect strip's response is
followed through its limit load and past folds in c (snap-backs) without branch
switching. Every step is a plain Newton solve on a dense (N + 3) system; step lengths
adapt to the Newton iteration count. Nothing here raises on numerical trouble: the path
reports how it ended.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import LinAlgWarning, lu_factor, lu_solve

from sweepshell.numerics.strip_elastica import (
    StripProblem,
    compute_crest_contrast,
    compute_gradient,
    compute_hessian,
    compute_node_heights,
)

PHI_WEIGHT = 30.0

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


def _residual(problem: StripProblem, X: np.ndarray) -> np.ndarray:
    g = problem.grid
    n, h, L = g.n, g.h, g.length
    phi, P, R, d = X[:n], X[n], X[n + 1], X[n + 2]
    sin, cos = np.sin(phi), np.cos(phi)
    r = np.empty(n + 2)
    r[:n] = compute_gradient(problem, phi) / h - P * sin + R * cos
    r[n] = (h * np.sum(1.0 - cos) - problem.slack0) / L - d
    r[n + 1] = h * np.sum(sin) / L
    return r


def _jacobian(problem: StripProblem, X: np.ndarray) -> np.ndarray:
    g = problem.grid
    n, h, L = g.n, g.h, g.length
    phi, P, R = X[:n], X[n], X[n + 1]
    sin, cos = np.sin(phi), np.cos(phi)
    J = np.zeros((n + 2, n + 3))
    H = compute_hessian(problem, phi) / h
    H[np.diag_indices(n)] += -P * cos - R * sin
    J[:n, :n] = H
    J[:n, n] = -sin
    J[:n, n + 1] = cos
    J[n, :n] = h * sin / L
    J[n, n + 2] = -1.0
    J[n + 1, :n] = h * cos / L
    return J


def _weights(n: int) -> np.ndarray:
    w = np.empty(n + 3)
    w[:n] = PHI_WEIGHT / n
    w[n] = 1.0
    w[n + 1] = 1e-4
    w[n + 2] = 100.0
    return w


def _factor(J: np.ndarray, row: np.ndarray):
    """LU factors of the bordered matrix [J; row], or None if singular or not finite."""
    A = np.vstack([J, row])
    if not np.all(np.isfinite(A)):
        return None
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", LinAlgWarning)
        lu = lu_factor(A, check_finite=False)
    if not np.all(np.isfinite(lu[0])) or np.min(np.abs(np.diag(lu[0]))) == 0.0:
        return None
    return lu


def _tangent(lu, W: np.ndarray) -> np.ndarray | None:
    rhs = np.zeros(lu[0].shape[0])
    rhs[-1] = 1.0
    t = lu_solve(lu, rhs, check_finite=False)
    norm = math.sqrt(float(np.sum(W * t * t)))
    if not math.isfinite(norm) or norm == 0.0:
        return None
    return t / norm


def _newton(problem: StripProblem, X: np.ndarray, row: np.ndarray, value: float, lu, tol: float,
            max_iter: int) -> tuple[np.ndarray | None, int]:
    """Solve the N + 2 equations plus ``row·X = value`` by Newton with occasional refactoring.

    ``lu`` (factors of [J; row] near X, or None) is reused as a chord matrix; it is
    refreshed at the current iterate whenever the update stops shrinking fast, which keeps
    most iterations at the cost of one O(N²) back-substitution.
    """
    last = math.inf
    for it in range(1, max_iter + 1):
        if lu is None:
            lu = _factor(_jacobian(problem, X), row)
            if lu is None:
                return None, it
        b = -np.concatenate([_residual(problem, X), [float(row @ X) - value]])
        dX = lu_solve(lu, b, check_finite=False)
        size = float(np.max(np.abs(dX))) if np.all(np.isfinite(dX)) else math.inf
        if size > 10.0:
            return None, it
        X = X + dX
        if size < tol:
            return X, it
        if size > 0.25 * last:
            lu = None  # slow contraction: refresh the Jacobian
        last = size
    return None, max_iter


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


def follow_confinement_path(problem: StripProblem, *, compliance: float, stop, tol: float = 1e-9,
                            max_steps: int = 400, ds_first: float = 0.1, ds_max: float = 1.0,
                            ds_min: float = 1e-5) -> StripPath:
    """Follow the equilibrium path from the stress-free state by pseudo-arclength continuation.

    Parameters
    ----------
    problem
        The discrete strip.
    compliance
        s = √(BK)/A, the normalised stretching compliance (0 for an inextensible strip).
    stop
        ``stop(path) -> bool`` called after each converged state; True ends the path
        with :attr:`PathEnd.reached`.
    tol
        Newton tolerance on the update and the residual.
    max_steps, ds_first, ds_max, ds_min
        Step budget and arclength step limits (weighted norm, see module notes).

    Returns
    -------
    StripPath
        The converged states and why the path ended.
    """
    n = problem.grid.n
    W = _weights(n)
    X = np.concatenate([problem.phi0, [0.0, 0.0, 0.0]])
    path = StripPath()
    _record(problem, path, X, compliance)
    t = np.zeros(n + 3)
    t[n] = 1.0  # load first
    lu = _factor(_jacobian(problem, X), t * W)
    t_maybe = None if lu is None else _tangent(lu, W)
    if t_maybe is None:
        path.end = PathEnd.stalled
        return path
    t = t_maybe
    lu = _factor(_jacobian(problem, X), t * W)
    ds = ds_first
    for _ in range(max_steps):
        if stop(path):
            path.end = PathEnd.reached
            return path
        X_new = t_new = lu_new = None
        its = 0
        while ds >= ds_min:
            X_pred = X + ds * t
            tw = t * W
            X_new, its = _newton(problem, X_pred, tw, float(tw @ X_pred), lu, tol, 16)
            path.newton_iterations += its
            if X_new is not None:
                lu_new = _factor(_jacobian(problem, X_new), t * W)
                t_new = None if lu_new is None else _tangent(lu_new, W)
            if X_new is not None and t_new is not None:
                turn = float(np.sum(W * t_new * t))
                if turn < 0.0:
                    t_new, turn = -t_new, -turn
                drift = math.sqrt(float(np.sum(W * (X_new - X_pred) ** 2)))
                # a sharp turn, a change of shape or a long corrector may mean the step
                # jumped to another branch (near a limit load the load barely changes while
                # the shape does, so the shape gets its own test)
                if turn >= 0.9 and _shape_turn(t, t_new, n) >= 0.8 and drift <= 0.3 * ds:
                    break
            X_new = t_new = None
            ds *= 0.5
            lu = None
        if X_new is None or t_new is None:
            path.end = PathEnd.stalled
            return path
        lu = lu_new
        X, t = X_new, t_new
        if _record(problem, path, X, compliance):
            path.end = PathEnd.contact
            return path
        grow = its <= 6 and turn >= 0.98 and drift <= 0.1 * ds
        ds = min(ds_max, ds * (1.6 if grow else (1.0 if its <= 10 else 0.6)))
    path.end = PathEnd.reached if stop(path) else PathEnd.max_steps
    return path


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

    X, _ = _newton(problem, X0, row, target, None, tol, 16)
    return X
