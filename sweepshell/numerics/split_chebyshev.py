"""Two-domain Chebyshev collocation of radial functions with a kink at ``x = ρ``.

A solution whose coefficients jump at an interior radius ρ (the sharp edge of a mismatch-strain
region) is piecewise smooth: analytic on ``[0, ρ]`` and on ``[ρ, 1]`` but only ``C^k`` at ρ.
One polynomial over ``[0, 1]`` converges to it only algebraically. Here each side gets its own
Chebyshev grid — the inner side ``[−ρ, ρ]`` the parity half grid of
:mod:`sweepshell.numerics.radial_chebyshev` scaled by ρ (regular at the axis, ``x_j = ρ cos(π j/(2q − 1))``,
``j = 0 … q−1``), the outer side the Chebyshev–Gauss–Lobatto points of ``[ρ, 1]`` — sharing the
node ρ. The unknowns are the values at the ``M`` distinct nodes, ordered from ``x = 1`` down
as on the single grid (edge row at index 0), and the derivative matrices are those of the
unique piecewise polynomial that interpolates them and is ``C^k`` at ρ (``smoothness`` k): one
parity polynomial inside and one polynomial outside, with ``k + 1`` more coefficients between
them than their nodes, fixed by the continuity of the value and the first k derivatives at ρ.
At the shared node the derivatives of order above k take the mean of their one-sided values.

Choosing k: the interpolation space must contain the exact solution, so k is the smoothness
of the field at ρ, and no operator may be formed as a product of derivative matrices across a
jump (that re-interpolates a less smooth intermediate). A second-order equation whose
coefficient jumps at ρ (the once-integrated axisymmetric cap equations: the slope's third
derivative jumps) wants k = 2; a fourth-order one with a jumping coefficient of its
second-order term (the buckling modes under a jumping hoop prestress: the fourth derivative
jumps) wants k = 3, with its biharmonic operator written directly with the fourth-derivative
matrix. Collocating the equation at ρ with the one-sided means is consistent: the exact
solution satisfies it on both sides, and the equation is linear in the jumping quantities.

The piecewise interpolant converges spectrally on each side, so results converge
geometrically in ``M`` (tested on the sharp-edged mismatch strain in
``tests/models/shallow_cap/test_mismatch_sharp.py``). Round-off grows with the node count
like that of the fourth-derivative matrices (about ``M⁸``): beyond about 64 nodes nothing is
gained (see the shallow_cap theory notes).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from numpy.polynomial import chebyshev

from sweepshell.numerics.radial_chebyshev import RadialGrid

__all__ = ["OUTER_SHARE", "build_split_grid", "get_split_counts"]

OUTER_SHARE = 0.6  # share of the nodes on [ρ, 1] (measured, see get_split_counts)


def get_split_counts(m: int, rho: float) -> tuple[int, int]:
    """Return ``(p, q)``: the outer grid's order (``p + 1`` nodes on ``[ρ, 1]``) and the inner half-grid size.

    ``p + q = m``. Half of the nodes go to each side, at least four to each: the outer side
    carries the clamped or pinned edge's boundary layer and (for a central disc) the
    wrinkles around the region, the inner one the region itself.
    """
    p = min(max(4, round(OUTER_SHARE * m)), m - 4)
    return p, m - p


def _derivative_values(t: np.ndarray, degrees: np.ndarray, scale: float, order: int) -> np.ndarray:
    """Return the ``order``-th x-derivative of ``T_d(t(x))``, ``t' = scale``, at ``t`` for each degree d."""
    top = int(degrees.max())
    coef: np.ndarray = np.eye(top + 1)
    if order:
        coef = chebyshev.chebder(coef, order, axis=0) * scale**order
    values = chebyshev.chebvander(t, coef.shape[0] - 1) @ coef
    return values[:, degrees]


def _interpolant(m: int, rho: float, smoothness: int, parity: int) -> tuple[np.ndarray, ...]:
    """Return the nodes, the coefficient maps and the bases of the two sides (see module docstring)."""
    p, q = get_split_counts(m, rho)
    outer_x = rho + (1.0 - rho) * 0.5 * (1.0 + np.cos(np.pi * np.arange(p + 1) / p))  # 1 … ρ
    inner_x = rho * np.cos(np.pi * np.arange(q) / (2 * q - 1))  # ρ … > 0
    extra_inner = (smoothness + 1) // 2
    inner_deg = 2 * np.arange(q + extra_inner) + (1 if parity == -1 else 0)
    outer_deg = np.arange(p + 1 + smoothness - extra_inner)
    ni = inner_deg.size
    size = ni + outer_deg.size
    centre, half = 0.5 * (1.0 + rho), 0.5 * (1.0 - rho)
    a = np.zeros((size, size))
    a[:q, :ni] = _derivative_values(inner_x / rho, inner_deg, 1.0 / rho, 0)
    a[q:q + p, ni:] = _derivative_values((outer_x[:-1] - centre) / half, outer_deg, 1.0 / half, 0)
    at_rho_in, at_rho_out = np.array([1.0]), np.array([-1.0])
    for k in range(smoothness + 1):
        a[q + p + k, :ni] = _derivative_values(at_rho_in, inner_deg, 1.0 / rho, k)[0]
        a[q + p + k, ni:] = -_derivative_values(at_rho_out, outer_deg, 1.0 / half, k)[0]
    # nodal values in the grid's order (outer nodes from x = 1, then the inner ones from ρ)
    rhs = np.zeros((size, m))
    rhs[np.arange(q), p + np.arange(q)] = 1.0
    rhs[q + np.arange(p), np.arange(p)] = 1.0
    # rows of derivatives at ρ grow like degree^(2k): equilibrate before solving
    scale = 1.0 / np.max(np.abs(a), axis=1)
    coef = np.linalg.solve(a * scale[:, None], rhs * scale[:, None])
    return outer_x, inner_x, coef[:ni], coef[ni:], inner_deg, outer_deg


@lru_cache(maxsize=64)
def build_split_grid(m: int, rho: float, smoothness: int = 2) -> RadialGrid:
    """Return the two-domain grid of ``m`` nodes split at ``ρ`` with ``C^smoothness`` interpolants (cached).

    Parameters
    ----------
    m
        Number of distinct nodes on ``(0, 1]`` (``x[0] = 1``, ρ is a node).
    rho
        The split radius, 0 < ρ < 1.
    smoothness
        Continuity k of the interpolant at ρ (2 or 3; see the module docstring).

    Returns
    -------
    RadialGrid
        With ``centre`` = ρ, derivative matrices ``d1 … d4`` for both parities and the
        quadrature rows ``integral``, ``moment2`` (Gauss–Legendre on each side, exact for the
        piecewise interpolant).
    """
    if not 0.0 < rho < 1.0 or m < 10 or smoothness not in (2, 3):
        raise ValueError(f"split grid needs 0 < rho < 1, m >= 10 and smoothness 2 or 3; got rho {rho}, m {m}, "
                         f"smoothness {smoothness}")
    ops: dict[str, dict[int, np.ndarray]] = {"d1": {}, "d2": {}, "d3": {}, "d4": {}, "integral": {},
                                             "moment2": {}}
    gl, gw = np.polynomial.legendre.leggauss(2 * m + 8)
    x = np.zeros(m)
    for par in (1, -1):
        outer_x, inner_x, ci, co, di, do = _interpolant(m, rho, smoothness, par)
        p = outer_x.size - 1
        x = np.concatenate([outer_x[:-1], inner_x])
        centre, half = 0.5 * (1.0 + rho), 0.5 * (1.0 - rho)
        for order in (1, 2, 3, 4):
            d = np.empty((m, m))
            d[:p] = _derivative_values((outer_x[:-1] - centre) / half, do, 1.0 / half, order) @ co
            d[p:] = _derivative_values(inner_x / rho, di, 1.0 / rho, order) @ ci
            # the mean of the one-sided values at ρ (equal up to round-off for orders up to k)
            d[p] = 0.5 * (d[p] + _derivative_values(np.array([-1.0]), do, 1.0 / half, order)[0] @ co)
            ops[f"d{order}"][par] = d
        t = 0.5 * (gl + 1.0)
        inner_pts, inner_w = rho * t, rho * 0.5 * gw
        outer_pts, outer_w = rho + (1.0 - rho) * t, (1.0 - rho) * 0.5 * gw
        e_in = _derivative_values(inner_pts / rho, di, 1.0 / rho, 0) @ ci
        e_out = _derivative_values((outer_pts - centre) / half, do, 1.0 / half, 0) @ co
        ops["integral"][par] = inner_w @ e_in + outer_w @ e_out
        ops["moment2"][par] = (inner_w * inner_pts**2) @ e_in + (outer_w * outer_pts**2) @ e_out
    x[0] = 1.0
    x[get_split_counts(m, rho)[0]] = rho
    for table in ops.values():
        for arr in table.values():
            arr.setflags(write=False)
    x.setflags(write=False)
    return RadialGrid(x=x, d1=ops["d1"], d2=ops["d2"], d3=ops["d3"], integral=ops["integral"],
                      moment2=ops["moment2"], stretch=0.0, centre=float(rho), d4=ops["d4"])
