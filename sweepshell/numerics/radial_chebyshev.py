"""Chebyshev collocation of radial functions of fixed parity on the half grid ``0 < x ≤ 1``.

A function ``u(x)`` on ``[0, 1]`` that extends to an even (parity +1) or odd (parity -1)
function on ``[-1, 1]`` is represented by its values at the positive Chebyshev–Gauss–Lobatto
points of an odd-order grid, ``x_j = cos(π j / (2M - 1))``, ``j = 0 … M-1``. The origin is
never a node, so terms such as ``u/x`` of a polar operator are evaluated without special
cases, and the parity builds regularity at ``x = 0`` into the discretisation (Trefethen 2000,
*Spectral Methods in MATLAB*, ch. 11, polar coordinates).

All matrices act on the ``M`` half-grid values; they are exact for polynomials of the given
parity and degree below ``2M``.

Optionally the nodes are stretched towards the axis by the odd cubic map
``x = (1 − β) ξ + β ξ³`` of the Chebyshev points ``ξ`` (``stretch`` β in [0, 1)): the spacing at
the axis shrinks by ``1 − β`` and grows at the edge by ``1 + 2β``. The map is an odd polynomial,
so parity and analyticity are kept and derivatives follow by the chain rule; it helps where the
solution varies fastest near the axis (an apex dimple, the state under an apex force).
Polynomial exactness then holds in ``ξ``, not in ``x``.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

__all__ = ["RadialGrid", "make_interpolation_matrix", "make_radial_grid"]


@dataclass(frozen=True)
class RadialGrid:
    """Half-grid nodes and parity-reduced operators.

    Attributes
    ----------
    x
        Nodes ``x_j``, shape ``(M,)``, ``x[0] = 1`` and decreasing towards (not reaching) 0.
    d1, d2, d3
        Dicts parity (+1 / -1) → first, second, third derivative matrices ``(M, M)``.
    integral
        Dict parity → weights ``w`` with ``w @ u ≈ ∫_0^1 u dx``.
    moment2
        Dict parity → weights with ``w @ u ≈ ∫_0^1 u x² dx``.
    stretch
        The map's β (0: plain Chebyshev points).
    """

    x: np.ndarray
    d1: dict[int, np.ndarray]
    d2: dict[int, np.ndarray]
    d3: dict[int, np.ndarray]
    integral: dict[int, np.ndarray]
    moment2: dict[int, np.ndarray]
    stretch: float = 0.0

    @property
    def size(self) -> int:
        return int(self.x.shape[0])


def _chebyshev_matrix(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Return the Chebyshev–Gauss–Lobatto points and differentiation matrix of order ``n``."""
    x = np.cos(np.pi * np.arange(n + 1) / n)
    c = np.ones(n + 1)
    c[0] = c[-1] = 2.0
    c *= (-1.0) ** np.arange(n + 1)
    dx = x[:, None] - x[None, :]
    d = np.outer(c, 1.0 / c) / (dx + np.eye(n + 1))
    d -= np.diag(d.sum(axis=1))
    return x, d


def _reduce(full: np.ndarray, m: int, parity: int) -> np.ndarray:
    """Fold a full-grid operator onto the half grid for functions of the given parity."""
    n = full.shape[0] - 1
    left = full[:m, :m]
    mirror = full[:m, n - np.arange(m)]
    return left + parity * mirror


def make_interpolation_matrix(m: int, parity: int, points: np.ndarray) -> np.ndarray:
    """Return ``E`` with ``E @ u`` = the interpolant of half-grid values ``u`` at ``points``.

    Parameters
    ----------
    m
        Number of half-grid nodes.
    parity
        +1 for even, -1 for odd functions.
    points
        Where to evaluate, inside ``[-1, 1]``, in the Chebyshev coordinate ξ (equal to x on an
        unstretched grid).
    """
    n = 2 * m - 1
    xf = np.cos(np.pi * np.arange(n + 1) / n)
    wb = (-1.0) ** np.arange(n + 1)
    wb[0] *= 0.5
    wb[-1] *= 0.5
    pts = np.asarray(points, dtype=float)
    diff = pts[:, None] - xf[None, :]
    exact = np.isclose(diff, 0.0, atol=1e-15)
    diff[exact] = 1.0
    k = wb[None, :] / diff
    full = k / k.sum(axis=1, keepdims=True)
    rows = np.nonzero(exact.any(axis=1))[0]
    full[rows] = exact[rows].astype(float)
    return _reduce_columns(full, m, parity)


def _reduce_columns(full: np.ndarray, m: int, parity: int) -> np.ndarray:
    n = full.shape[1] - 1
    return full[:, :m] + parity * full[:, n - np.arange(m)]


def _map_to_x(xi: np.ndarray, beta: float) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Return ``x`` and its first three ξ-derivatives under ``x = (1 − β) ξ + β ξ³``."""
    x = (1.0 - beta) * xi + beta * xi**3
    return x, 1.0 - beta + 3.0 * beta * xi**2, 6.0 * beta * xi, np.full_like(xi, 6.0 * beta)


@lru_cache(maxsize=64)
def make_radial_grid(m: int, stretch: float = 0.0) -> RadialGrid:
    """Return the half grid of ``m`` nodes with its parity-reduced operators (cached).

    Parameters
    ----------
    m
        Number of nodes on ``(0, 1]``; the full grid has ``2m`` points.
    stretch
        β of the map ``x = (1 − β) ξ + β ξ³`` (0 ≤ β < 1; 0: Chebyshev points).
    """
    if not 0.0 <= stretch < 1.0:
        raise ValueError(f"stretch must be in [0, 1), got {stretch}")
    n = 2 * m - 1
    xf, d = _chebyshev_matrix(n)
    d2 = d @ d
    d3 = d2 @ d
    gl_x, gl_w = np.polynomial.legendre.leggauss(4 * m + 8)
    gl_x = 0.5 * (gl_x + 1.0)
    gl_w = 0.5 * gl_w
    x, g1, g2, g3 = _map_to_x(xf[:m], stretch)
    gx, gx1, _, _ = _map_to_x(gl_x, stretch)
    ops: dict[str, dict[int, np.ndarray]] = {"d1": {}, "d2": {}, "d3": {}, "integral": {}, "moment2": {}}
    for p in (1, -1):
        e1, e2, e3 = _reduce(d, m, p), _reduce(d2, m, p), _reduce(d3, m, p)
        # chain rule: d/dx = (1/g') d/dξ, and so on
        ops["d1"][p] = e1 / g1[:, None]
        ops["d2"][p] = e2 / g1[:, None] ** 2 - (g2 / g1**3)[:, None] * e1
        ops["d3"][p] = (e3 / g1[:, None] ** 3 - (3.0 * g2 / g1**4)[:, None] * e2
                        + (3.0 * g2**2 / g1**5 - g3 / g1**4)[:, None] * e1)
        e = make_interpolation_matrix(m, p, gl_x)
        ops["integral"][p] = (gl_w * gx1) @ e
        ops["moment2"][p] = (gl_w * gx1 * gx**2) @ e
    for table in ops.values():
        for arr in table.values():
            arr.setflags(write=False)
    x.setflags(write=False)
    return RadialGrid(x=x, stretch=float(stretch), **ops)
