"""L-BFGS minimisation of the periodic film-cell energy (our own, with a backtracking line search).

The variable is the preconditioned z of :mod:`sweepshell.models.foundation_sheet.energy`, in which
the bending/substrate part of the Hessian is the identity.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from sweepshell.models.foundation_sheet.energy import SheetProblem, compute_height_field, evaluate_sheet_energy

__all__ = ["SheetMinimum", "minimize_sheet_energy"]


@dataclass(frozen=True)
class SheetMinimum:
    """Result of one minimisation.

    Attributes
    ----------
    height
        Scaled equilibrium height W on the n × n grid.
    energy
        Scaled energy Π̃ − Π̃_flat (units of Ē_f h ε_c²).
    converged
        Whether the minimiser met its gradient or energy-change tolerance.
    finite
        Whether every value stayed finite.
    iterations
        L-BFGS iterations used.
    gradient_norm
        Largest component of the final gradient in z.
    history
        Scaled energy after each iteration (empty unless recorded).
    """

    height: np.ndarray
    energy: float
    converged: bool
    finite: bool
    iterations: int
    gradient_norm: float
    history: tuple[float, ...] = ()


def minimize_sheet_energy(problem: SheetProblem, z0: np.ndarray, *, gradient_tolerance: float = 1e-6,
                          max_iterations: int = 4000, record: bool = False,
                          memory: int = 8) -> SheetMinimum:
    """Minimise the cell energy with L-BFGS from the preconditioned start ``z0``.

    A small L-BFGS of our own (two-loop recursion, Armijo backtracking, step doubling along
    directions of negative curvature) rather than ``scipy.optimize``'s, whose BLAS calls on
    tiny matrices cost milliseconds per iteration when the BLAS library runs threaded.
    Every accepted step lowers the energy (Armijo), so the energy history is monotone.

    Parameters
    ----------
    problem
        The cell problem.
    z0
        Start (flat array of n² values), typically a small random field.
    gradient_tolerance
        Stop when the largest gradient component in z falls below this (the variable is
        preconditioned to a unit bending/substrate Hessian, so this is a tolerance on a
        well-scaled problem).
    max_iterations
        Iteration cap; reaching it means not converged.
    record
        Keep the energy after every iteration (for tests of monotone descent).
    memory
        Number of L-BFGS correction pairs.

    Returns
    -------
    SheetMinimum
    """
    n2 = float(problem.n**2)
    x = np.array(z0, dtype=float)
    f, g = evaluate_sheet_energy(problem, x)
    pairs: list[tuple[np.ndarray, np.ndarray, float]] = []  # (step, gradient change, their dot)
    history: list[float] = []
    converged = False
    iterations = 0
    while iterations < max_iterations:
        if float(np.abs(g).max()) <= gradient_tolerance:
            converged = True
            break
        iterations += 1
        d = _compute_lbfgs_direction(g, pairs)
        slope = float(g @ d)
        if not slope < 0.0:
            pairs.clear()
            d, slope = -g, -float(g @ g)
        accepted = _search_line(problem, x, f, d, slope)
        if accepted is None:
            break
        t, f_new, g_new = accepted
        s_vec, y_vec = t * d, g_new - g
        sy = float(s_vec @ y_vec)
        if sy > 1e-12 * float(np.sqrt((s_vec @ s_vec) * (y_vec @ y_vec))):
            pairs.append((s_vec, y_vec, sy))
            if len(pairs) > memory:
                pairs.pop(0)
        x, f, g = x + s_vec, f_new, g_new
        if record:
            history.append(f / n2)
        if not np.isfinite(f):
            break
    gnorm = float(np.abs(g).max())
    finite = bool(np.isfinite(f) and np.all(np.isfinite(x)))
    # a line search that stalls at round-off with a small gradient is converged in practice
    converged = finite and (converged or gnorm <= 100.0 * gradient_tolerance)
    return SheetMinimum(height=compute_height_field(problem, x), energy=f / n2, converged=converged,
                        finite=finite, iterations=iterations, gradient_norm=gnorm,
                        history=tuple(history))


def _compute_lbfgs_direction(g: np.ndarray, pairs: list[tuple[np.ndarray, np.ndarray, float]]) -> np.ndarray:
    """Return the L-BFGS descent direction by the two-loop recursion.

    The updates run in place on one work vector and one scratch vector (the same
    arithmetic as ``q = q − a·y``, without a new array per pair).
    """
    q = -g
    scratch = np.empty_like(q)
    alphas = []
    for s_vec, y_vec, sy in reversed(pairs):
        a = float(s_vec @ q) / sy
        alphas.append(a)
        np.subtract(q, np.multiply(a, y_vec, out=scratch), out=q)
    if pairs:
        y_last = pairs[-1][1]
        np.multiply(q, pairs[-1][2] / float(y_last @ y_last), out=q)
    for (s_vec, y_vec, sy), a in zip(pairs, reversed(alphas), strict=True):
        np.add(q, np.multiply(a - float(y_vec @ q) / sy, s_vec, out=scratch), out=q)
    return q


def _search_line(problem: SheetProblem, x: np.ndarray, f: float, d: np.ndarray,
                 slope: float) -> tuple[float, float, np.ndarray] | None:
    """Return (step, energy, gradient) of an Armijo step along d, or None if none is found.

    The step starts at 1, halves until the Armijo condition holds, and doubles while the
    energy keeps falling and the directional derivative stays negative (the start near a
    saddle, where the quadratic model underestimates the useful step).
    """
    c1 = 1e-4
    t = 1.0
    # an overflowing trial step is simply too long: backtrack instead of failing the point
    with np.errstate(over="ignore", invalid="ignore"):
        for _ in range(60):
            f_t, g_t = evaluate_sheet_energy(problem, x + t * d)
            if math.isfinite(f_t) and np.isfinite(g_t).all() and f_t <= f + c1 * t * slope:
                break
            t *= 0.5
        else:
            return None
        for _ in range(20):
            if float(g_t @ d) >= 0.5 * slope:
                break
            f_2, g_2 = evaluate_sheet_energy(problem, x + 2.0 * t * d)
            if not (math.isfinite(f_2) and np.isfinite(g_2).all()
                    and f_2 <= f + c1 * 2.0 * t * slope and f_2 < f_t):
                break
            t, f_t, g_t = 2.0 * t, f_2, g_2
    return t, float(f_t), g_t
