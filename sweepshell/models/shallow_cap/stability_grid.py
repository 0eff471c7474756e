"""The stability grid of apex-force cap states and the state's interpolant on it (shallow-cap model).

Apex-force states: the stability grid is finer than the state's
-----------------------------------------------------------------
Under a point load the surface curvature ``ζ''`` (and ``ζ'/x``) of the state grows like
``log x`` at the apex. Collocating the operator with that curvature sampled at the nodes, or
with the interpolant of the state on its own grid, is not a convergent discretisation. With
the log sampled, the eigenvalues' rate of change with the force at zero force grows like the
node count (λ = 10, n = 2, over λ⁴ per unit force P: −70, −109, −159, −213 for 24, 34, 48, 64
nodes; on the refined grid below +0.082 at all four), so n = 2, 3 determinants change sign at
the first loaded step. With the state's interpolant on its own grid, at λ = 10 and δ ≈ h, the n = 3
operator has an eigenvalue of −22, −75, −232, −604 λ⁴ (24 … 64 nodes; its eigenvector sits on
the innermost nodes) and n = 4 converges to a value 14 % too high. The continuous operator is
well posed: in displacement form its quadratic form depends on the slope ``ζ'`` (bounded,
``x log x``) and the prestress (bounded) only, so its eigenvalues depend continuously on ``ζ'``
in the maximum norm. Apex-force states are therefore analysed as the polynomial interpolant of
the discrete state (slope ``ζ'`` and stress slope ``f`` on the state's ``M`` nodes, degree
``2M − 1``; ``ζ''`` and ``f'`` its exact derivatives) on a grid of
``APEX_STABILITY_REFINEMENT·M`` nodes that resolves that polynomial. The interpolant
converges uniformly to the state as ``M`` grows, and for a fixed interpolant the eigenvalues
converge with the stability grid: at λ = 10, δ ≈ h the lowest eigenvalues of n = 2, 3, 4 over
λ⁴ are 1.3724, 1.4645, 1.6489 on 3M and 4M nodes for M = 24, 34, 48 (within 4·10⁻⁴). A 2M grid
is enough at λ = 10 but not at λ = 20 (spurious modes again), hence 3M; this costs about
8× the scan of a pressure point.
The asymmetric scan of apex-force states first screens every path step on a cheaper grid, the
state's own nodes with the interpolant filtered (its Chebyshev coefficients times
``exp(−36 (k/K)⁸)``, which damps the wiggles of the interpolated log-singular curvature that
make the unfiltered own grid spurious), and evaluates this stability grid only where the
screen's signs change (:mod:`.screened_scan`): the screen decides where to look, never the result.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from sweepshell.models.shallow_cap.kernels import CapPathProblem
from sweepshell.numerics.array_cache import cache_arrays
from sweepshell.numerics.radial_chebyshev import build_interpolation_matrix, build_radial_grid, to_chebyshev_coordinate

__all__ = [
    "APEX_SCREEN_FILTER",
    "APEX_SCREEN_REFINEMENT",
    "APEX_STABILITY_REFINEMENT",
    "build_refinement",
    "select_stability_nodes",
]

APEX_STABILITY_REFINEMENT = 3
# the screening grid of apex-force scans (scan.py): nodes per state node, and the exponential
# filter exp(−α (k/K)^p) of the interpolant's Chebyshev coefficients (α, p)
APEX_SCREEN_REFINEMENT = 1.0
APEX_SCREEN_FILTER = (36.0, 8.0)


def select_stability_nodes(problem: CapPathProblem, idx: np.ndarray, screen: bool = False) -> np.ndarray:
    """Return the node count of each state's stability grid, ``(k,)``.

    ``APEX_STABILITY_REFINEMENT`` times the state's nodes for apex-force states (see the module
    docstring), the state's own nodes otherwise; with ``screen``, apex-force states get the
    smaller screening grid (``APEX_SCREEN_REFINEMENT`` times the state's nodes).
    """
    factor = APEX_SCREEN_REFINEMENT if screen else APEX_STABILITY_REFINEMENT
    return np.where(problem.apex[idx], round(factor * problem.size), problem.size)


@lru_cache(maxsize=16)
def _build_odd_filter(size: int, alpha: float, order: float) -> np.ndarray:
    """Return ``F`` ``(size, size)``: half-grid values of an odd function → those of its filtered interpolant.

    The interpolant's Chebyshev coefficients ``a_k`` (degree ``K = 2·size − 1``) are multiplied by
    ``exp(−α (k/K)^order)``.
    """
    n = 2 * size - 1
    t = np.cos(np.pi * np.outer(np.arange(n + 1), np.arange(n + 1)) / n)
    full = (t * np.exp(-alpha * (np.arange(n + 1) / n) ** order)[None, :]) @ np.linalg.inv(t)
    return full[:size, :size] - full[:size, n - np.arange(size)]


@cache_arrays(64 * 2**20)
def build_refinement(size: int, nodes: int, stretch: float = 0.0, centre: float = 0.0,
                      smooth: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Return ``(E, D E)``: values and slopes at the ``nodes`` grid of the odd interpolant on ``size`` nodes.

    The interpolation runs in the Chebyshev coordinate ξ of the ``size`` grid. The cubic map of
    ``stretch`` is the same for every node count, so there the fine grid's ξ are its unstretched
    nodes; the clustered map of ``centre`` depends on the node count, so its ξ are computed.
    With ``smooth`` the interpolant is filtered first (``APEX_SCREEN_FILTER``, the screening grid).
    """
    fine = build_radial_grid(nodes, stretch, centre)
    xi = build_radial_grid(nodes).x if centre == 0.0 else to_chebyshev_coordinate(fine.x, size, stretch, centre)
    e = build_interpolation_matrix(size, -1, xi)
    if smooth:
        e = e @ _build_odd_filter(size, *APEX_SCREEN_FILTER)
    de = fine.d1[-1] @ e
    e.setflags(write=False)
    de.setflags(write=False)
    return e, de
