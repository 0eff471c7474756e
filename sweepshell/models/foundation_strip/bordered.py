"""Bordered Newton solves of the discrete strip: residual, Jacobian, LU factors, tangents.

Unknowns X = (φ₁..φ_N, P, R, d) and the N + 2 equations of
:mod:`sweepshell.models.foundation_strip.continuation`, closed by one bordering row
``row·X = value`` (the pseudo-arclength condition, or a fixed confinement).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
from scipy.linalg import LinAlgWarning, lu_factor, lu_solve

from sweepshell.models.foundation_strip.elastica import StripProblem, compute_gradient, compute_hessian

__all__ = ["PHI_WEIGHT", "build_weights", "compute_jacobian", "compute_residual", "factor_bordered",
           "get_det_sign", "solve_newton", "solve_tangent"]

PHI_WEIGHT = 30.0


def compute_residual(problem: StripProblem, X: np.ndarray) -> np.ndarray:
    g = problem.grid
    n, h, L = g.n, g.h, g.length
    phi, P, R, d = X[:n], X[n], X[n + 1], X[n + 2]
    sin, cos = np.sin(phi), np.cos(phi)
    r = np.empty(n + 2)
    r[:n] = compute_gradient(problem, phi) / h - P * sin + R * cos
    r[n] = (h * np.sum(1.0 - cos) - problem.slack0) / L - d
    r[n + 1] = h * np.sum(sin) / L
    return r


def compute_jacobian(problem: StripProblem, X: np.ndarray) -> np.ndarray:
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


def build_weights(n: int) -> np.ndarray:
    w = np.empty(n + 3)
    w[:n] = PHI_WEIGHT / n
    w[n] = 1.0
    w[n + 1] = 1e-4
    w[n + 2] = 100.0
    return w


def factor_bordered(J: np.ndarray, row: np.ndarray):
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


def solve_tangent(lu, W: np.ndarray) -> np.ndarray | None:
    rhs = np.zeros(lu[0].shape[0])
    rhs[-1] = 1.0
    t = lu_solve(lu, rhs, check_finite=False)
    norm = math.sqrt(float(np.sum(W * t * t)))
    if not math.isfinite(norm) or norm == 0.0:
        return None
    return t / norm


def solve_newton(problem: StripProblem, X: np.ndarray, row: np.ndarray, value: float, lu, tol: float,
            max_iter: int) -> tuple[np.ndarray | None, int]:
    """Solve the N + 2 equations plus ``row·X = value`` by Newton with occasional refactoring.

    ``lu`` (factors of [J; row] near X, or None) is reused as a chord matrix; it is
    refreshed at the current iterate whenever the update stops shrinking fast, which keeps
    most iterations at the cost of one O(N²) back-substitution.
    """
    last = math.inf
    for it in range(1, max_iter + 1):
        if lu is None:
            lu = factor_bordered(compute_jacobian(problem, X), row)
            if lu is None:
                return None, it
        b = -np.concatenate([compute_residual(problem, X), [float(row @ X) - value]])
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


def get_det_sign(lu) -> int:
    """Sign of the determinant of an LU-factored matrix (pivots and the diagonal of U)."""
    lu_mat, piv = lu
    swaps = int(np.count_nonzero(piv != np.arange(piv.size)))
    negative = int(np.count_nonzero(np.diag(lu_mat) < 0.0))
    return -1 if (swaps + negative) % 2 else 1
