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
import warnings
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import LinAlgWarning, lu_factor, lu_solve, svd

from sweepshell.models.foundation_strip.elastica import (
    StripProblem,
    compute_crest_contrast,
    compute_critical_mode,
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


def _det_sign(lu) -> int:
    """Sign of the determinant of an LU-factored matrix (pivots and the diagonal of U)."""
    lu_mat, piv = lu
    swaps = int(np.count_nonzero(piv != np.arange(piv.size)))
    negative = int(np.count_nonzero(np.diag(lu_mat) < 0.0))
    return -1 if (swaps + negative) % 2 else 1


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


def _orient_switch(problem: StripProblem, X: np.ndarray, z: np.ndarray) -> np.ndarray:
    """Sign the secondary mode z so that the wrinkle grows in the middle third of the strip.

    A deterministic choice (the imperfection shape localises at mid-length too); where the
    mode is orthogonal to the wrinkle there (a sideways shift of the envelope) the first
    node height larger than half the largest is made positive instead.
    """
    g = problem.grid
    n = g.n
    y = compute_node_heights(X[:n], g.h)
    dy = compute_node_heights(X[:n] + 1e-6 * z[:n], g.h) - y
    mid = slice(n // 3, n - n // 3)
    score = float(np.sum(y[mid] * dy[mid]))
    if abs(score) <= 1e-3 * float(np.linalg.norm(y)) * float(np.linalg.norm(dy)):
        first = int(np.nonzero(np.abs(dy) > 0.5 * np.max(np.abs(dy)))[0][0])
        score = float(dy[first])
    return z if score >= 0.0 else -z


def _keeps_mirror_symmetry(problem: StripProblem, X: np.ndarray, z: np.ndarray) -> bool:
    """Whether the mode z has the wrinkle's own parity under the mirror x → L − x.

    Such a mode changes the envelope symmetrically (it localises the wrinkle at
    mid-length or spreads it to both ends); the other kind shifts the envelope towards
    one end.
    """
    g = problem.grid
    y = compute_node_heights(X[: g.n], g.h)
    dy = compute_node_heights(z[: g.n], g.h)
    parity = 1.0 if float(y @ y[::-1]) >= 0.0 else -1.0
    return float(np.linalg.norm(dy - parity * dy[::-1])) < float(np.linalg.norm(dy + parity * dy[::-1]))


def _locate_bifurcation(problem: StripProblem, X: np.ndarray, t: np.ndarray, ds: float, W: np.ndarray,
                        tol: float):
    """Locate a simple bifurcation between X and the step ``ds`` along t; return (X_b, z) or None.

    The determinant of [J; tᵀW] changes sign across the bifurcation (it keeps its sign
    through limit points); bisection in the arclength on the followed branch brackets
    the sign change to 1e-3 of the step. The bifurcating direction z is the right
    singular vector of [J; tᵀW] with the smallest singular value, W-orthogonal to the
    branch and W-normalised.
    """
    tw = t * W

    def solve_at(sigma: float) -> tuple[np.ndarray | None, int]:
        Xs, _ = _newton(problem, X + sigma * t, tw, float(tw @ (X + sigma * t)), None, tol, 16)
        if Xs is None:
            return None, 0
        lu = _factor(_jacobian(problem, Xs), tw)
        return Xs, 0 if lu is None else _det_sign(lu)

    lu0 = _factor(_jacobian(problem, X), tw)
    if lu0 is None:
        return None
    sign_lo = _det_sign(lu0)
    lo, hi = 0.0, ds
    X_lo = X
    while hi - lo > 1e-3 * ds:
        mid = 0.5 * (lo + hi)
        Xm, sign_m = solve_at(mid)
        if Xm is None or sign_m == 0:
            return None
        if sign_m == sign_lo:
            lo, X_lo = mid, Xm
        else:
            hi = mid
    Xb, _ = solve_at(0.5 * (lo + hi))
    Xb = X_lo if Xb is None else Xb
    z = svd(np.vstack([_jacobian(problem, Xb), tw]), check_finite=False)[2][-1]
    z = z - float(z @ (W * t)) * t
    norm = math.sqrt(float(np.sum(W * z * z)))
    if not math.isfinite(norm) or norm == 0.0:
        return None
    return Xb, z / norm


def _switch_branch(problem: StripProblem, Xb: np.ndarray, z: np.ndarray, W: np.ndarray, tol: float,
                   eps: float):
    """Step from the bifurcation X_b onto the branch along z; return (X_new, t_new) or None.

    A corrector from X_b + ε z holding zᵀW(X − X_b) = ε, which excludes the followed
    branch (W-orthogonal to z).
    """
    z = _orient_switch(problem, Xb, z)
    zw = z * W
    X_new, _ = _newton(problem, Xb + eps * z, zw, float(zw @ (Xb + eps * z)), None, tol, 16)
    if X_new is None:
        return None
    lu = _factor(_jacobian(problem, X_new), zw)
    t_new = None if lu is None else _tangent(lu, W)
    if t_new is None:
        return None
    if float(np.sum(W * t_new * z)) < 0.0:
        t_new = -t_new
    return X_new, t_new


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
    W = _weights(n)
    path = StripPath()
    perfect = not np.any(problem.phi0) and not np.any(problem.kappa0)
    if perfect:
        # the flat state is an equilibrium at every P: start at its first bifurcation
        X, t = _start_on_wrinkled_branch(problem, path, compliance, W)
        lu = None
    else:
        X = np.concatenate([problem.phi0, [0.0, 0.0, 0.0]])
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
    watch_sign: int | None = None
    watching = perfect
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
        if X_new is None or t_new is None or lu_new is None:
            path.end = PathEnd.stalled
            return path
        if watching:
            # det [J; tᵀW] keeps its sign along a branch (also through limit points) and
            # changes it at a simple bifurcation: the wrinkle branch's first one is taken
            sign = _det_sign(lu_new)
            if watch_sign is not None and sign != watch_sign:
                found = _locate_bifurcation(problem, X, t, ds, W, tol)
                if found is None:
                    path.end = PathEnd.stalled
                    return path
                Xb, z = found
                path.passed.append(float(Xb[n + 2] + compliance * Xb[n]))
                if _keeps_mirror_symmetry(problem, Xb, z):
                    switched = _switch_branch(problem, Xb, z, W, tol, switch_step)
                    if switched is None:
                        path.end = PathEnd.stalled
                        return path
                    watching = False
                    X_new, t_new = switched
                    _record(problem, path, Xb, compliance)
                    path.bifurcations.append(len(path.load) - 1)
                    lu_new = _factor(_jacobian(problem, X_new), t_new * W)
                    ds, its, turn, drift = ds_first / 1.6, 0, 1.0, 0.0  # restart as from a fresh state
            watch_sign = sign
        lu = lu_new
        X, t = X_new, t_new
        if _record(problem, path, X, compliance):
            path.end = PathEnd.contact
            return path
        grow = its <= 6 and turn >= 0.98 and drift <= 0.1 * ds
        # short steps while watching, so that two bifurcations never share one step
        ds = min(watch_step if watching else ds_max, ds * (1.6 if grow else (1.0 if its <= 10 else 0.6)))
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
