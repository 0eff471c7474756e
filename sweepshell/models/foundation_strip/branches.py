"""Branch switching of a perfect strip: locate a simple bifurcation and step onto the new branch."""

from __future__ import annotations

import math

import numpy as np
from scipy.linalg import svd

from sweepshell.models.foundation_strip.bordered import (
    compute_jacobian,
    factor_bordered,
    get_det_sign,
    solve_newton,
    solve_tangent,
)
from sweepshell.models.foundation_strip.elastica import StripProblem, compute_node_heights

__all__ = ["keeps_mirror_symmetry", "locate_bifurcation", "switch_branch"]


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


def keeps_mirror_symmetry(problem: StripProblem, X: np.ndarray, z: np.ndarray) -> bool:
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


def locate_bifurcation(problem: StripProblem, X: np.ndarray, t: np.ndarray, ds: float, W: np.ndarray,
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
        Xs, _ = solve_newton(problem, X + sigma * t, tw, float(tw @ (X + sigma * t)), None, tol, 16)
        if Xs is None:
            return None, 0
        lu = factor_bordered(compute_jacobian(problem, Xs), tw)
        return Xs, 0 if lu is None else get_det_sign(lu)

    lu0 = factor_bordered(compute_jacobian(problem, X), tw)
    if lu0 is None:
        return None
    sign_lo = get_det_sign(lu0)
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
    z = svd(np.vstack([compute_jacobian(problem, Xb), tw]), check_finite=False)[2][-1]
    z = z - float(z @ (W * t)) * t
    norm = math.sqrt(float(np.sum(W * z * z)))
    if not math.isfinite(norm) or norm == 0.0:
        return None
    return Xb, z / norm


def switch_branch(problem: StripProblem, Xb: np.ndarray, z: np.ndarray, W: np.ndarray, tol: float,
                   eps: float):
    """Step from the bifurcation X_b onto the branch along z; return (X_new, t_new) or None.

    A corrector from X_b + ε z holding zᵀW(X − X_b) = ε, which excludes the followed
    branch (W-orthogonal to z).
    """
    z = _orient_switch(problem, Xb, z)
    zw = z * W
    X_new, _ = solve_newton(problem, Xb + eps * z, zw, float(zw @ (Xb + eps * z)), None, tol, 16)
    if X_new is None:
        return None
    lu = factor_bordered(compute_jacobian(problem, X_new), zw)
    t_new = None if lu is None else solve_tangent(lu, W)
    if t_new is None:
        return None
    if float(np.sum(W * t_new * z)) < 0.0:
        t_new = -t_new
    return X_new, t_new
