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

Alternatively the nodes cluster around ``x = ±ρ`` (``centre`` ρ in (0, 1)) with one node exactly
at ``x = ρ``, for solutions with a kink there (a sharp-edged mismatch strain). The map is given
by its odd, increasing inverse ``ξ = φ⁻¹(h(x))`` with

    h(x) = [a x + asinh((x − ρ)/ε) + asinh((x + ρ)/ε)] / [a + asinh((1 − ρ)/ε) + asinh((1 + ρ)/ε)],

a sinh-type map for interior layers (as in Tee & Trefethen 2006, SIAM J. Sci. Comput. 28:1798;
reference from memory, not checked by a test) summed over both centres so the map stays odd:
node density ∝ a + 1/√((x ∓ ρ)² + ε²), a geometric grading down to the cluster width ``ε`` =
min(0.04, 0.01 (48/M)²) (:func:`get_cluster_width`), with the share ``CLUSTER_SHARE`` = 0.4 of
``h`` given to the smooth part ``a x``. ``φ(ξ) = (1 − γ) ξ + γ ξ³`` is a small odd correction
that moves the node nearest to ``h(ρ)`` onto it (|γ| ≤ 0.3, so φ' ≥ 0.4; for ρ within about
one node spacing of 0 or 1, ρ < 0.003 on 48 nodes, ρ < 0.03 or > 0.9999 on 16, the node stops
short of ρ). The map is smooth (analytic in a strip of half-width ≈ ε around ±ρ), so parity
is kept and smooth functions keep spectral accuracy, at the cost of the nodes in the clusters
(derivatives of sin 3x·x² to ≈ 10⁻⁸ on 48 nodes instead of ≈ 10⁻¹³). A function with a
kink at ρ converges only algebraically on any such grid, but with a constant that falls with ε.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

__all__ = [
    "CLUSTER_SHARE",
    "RadialGrid",
    "build_interpolation_matrix",
    "build_radial_grid",
    "chebyshev_matrix",
    "get_cluster_width",
    "to_chebyshev_coordinate",
]

CLUSTER_SHARE = 0.4  # share of the map h given to the clusters at ±ρ (measured, see get_cluster_width)


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
        Parity → weights ``w`` with ``w @ u ≈ ∫_0^1 u dx`` (computed on first use on a single grid:
        the finer grids of stability operators never integrate, and their Gauss–Legendre rule of
        4M + 8 points costs more than their derivative matrices).
    moment2
        Parity → weights with ``w @ u ≈ ∫_0^1 u x² dx`` (as ``integral``).
    stretch
        The cubic map's β (0: plain Chebyshev points).
    centre
        The clustered map's ρ (0: no clustering); ``x`` then holds ρ exactly.
    split, interface, d4, jumps, flux_weight
        Of a two-domain grid split at ρ = ``split`` (0: one domain) with ρ at index
        ``interface``, its fourth-derivative matrices, the rows of the one-sided derivative
        differences at ρ and the weight of the first one in a second-order equation's row
        there (:mod:`sweepshell.numerics.radial_two_domain`).
    """

    x: np.ndarray
    d1: dict[int, np.ndarray]
    d2: dict[int, np.ndarray]
    d3: dict[int, np.ndarray]
    integral: Mapping[int, np.ndarray]
    moment2: Mapping[int, np.ndarray]
    stretch: float = 0.0
    centre: float = 0.0
    split: float = 0.0
    interface: int = 0
    d4: dict[int, np.ndarray] | None = None
    jumps: dict[int, np.ndarray] | None = None
    flux_weight: float = 0.0

    @property
    def size(self) -> int:
        return int(self.x.shape[0])


def chebyshev_matrix(n: int) -> tuple[np.ndarray, np.ndarray]:
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


def build_interpolation_matrix(m: int, parity: int, points: np.ndarray) -> np.ndarray:
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


def get_cluster_width(m: int) -> float:
    """Return the cluster width ε (over the radius) of the clustered map on ``m`` nodes.

    ε ∝ 1/M² (capped at 0.04): with a node at ρ and the mean of a jumping coefficient there,
    the error of a kinked problem is O(ε²) at a fixed share of nodes (the measurement on the
    sharp-edged mismatch strain is in ``models/shallow_cap/theory.md``), so the error falls
    like M⁻⁴ or faster while the smooth part keeps its nodes.
    """
    return min(0.04, 0.01 * (48.0 / m) ** 2)


_MAX_NODE_SHIFT = 0.3


def _cluster_h(x: np.ndarray, rho: float, eps: float, a: float) -> tuple[np.ndarray, ...]:
    """Return ``h`` and its first three x-derivatives (the normalised clustered map, see module docstring)."""

    def arcsinh_terms(u: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        s = 1.0 / np.sqrt(1.0 + u * u)
        return np.arcsinh(u), s, -u * s**3, (2.0 * u * u - 1.0) * s**5

    lo = arcsinh_terms((x - rho) / eps)
    hi = arcsinh_terms((x + rho) / eps)
    norm = a + np.arcsinh((1.0 - rho) / eps) + np.arcsinh((1.0 + rho) / eps)
    return ((a * x + lo[0] + hi[0]) / norm, (a + (lo[1] + hi[1]) / eps) / norm,
            (lo[2] + hi[2]) / (eps**2 * norm), (lo[3] + hi[3]) / (eps**3 * norm))


def _invert_increasing(fun, values: np.ndarray) -> np.ndarray:  # type: ignore[no-untyped-def]
    """Return ``x`` in [−1, 1] with ``fun(x)[0] = values`` for an increasing ``fun`` (bisection, then Newton)."""
    lo, hi = np.full(values.shape, -1.0), np.full(values.shape, 1.0)
    for _ in range(50):
        mid = 0.5 * (lo + hi)
        above = fun(mid)[0] > values
        hi, lo = np.where(above, mid, hi), np.where(above, lo, mid)
    x = 0.5 * (lo + hi)
    for _ in range(2):
        v = fun(x)
        x = x - (v[0] - values) / v[1]
    return x


def _cluster_parameters(m: int, rho: float) -> tuple[float, float, float]:
    """Return ``(ε, a, γ)`` of the clustered map of ``m`` nodes around ±ρ with a node at ρ."""
    eps = get_cluster_width(m)
    c = np.arcsinh((1.0 - rho) / eps) + np.arcsinh((1.0 + rho) / eps)
    a = CLUSTER_SHARE / (1.0 - CLUSTER_SHARE) * c
    target = float(_cluster_h(np.array([rho]), rho, eps, a)[0][0])
    xi = np.cos(np.pi * np.arange(m) / (2 * m - 1))[1:]
    # γ of φ(ξ) = (1 − γ) ξ + γ ξ³ that takes each interior node to h(ρ); the smallest |γ| wins
    gamma = (target - xi) / (xi**3 - xi)
    best = int(np.argmin(np.abs(gamma)))
    # |γ| ≤ 0.3 keeps φ' ≥ 0.4: within about a node spacing of 0 or 1 no node can be moved onto ρ
    return eps, a, float(np.clip(gamma[best], -_MAX_NODE_SHIFT, _MAX_NODE_SHIFT))


def _cluster_map(xi: np.ndarray, m: int, rho: float) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Return ``x`` and its first three ξ-derivatives under the clustered map around ±ρ."""
    eps, a, gamma = _cluster_parameters(m, rho)
    p0, p1, p2, p3 = _map_to_x(xi, gamma)
    x = _invert_increasing(lambda v: _cluster_h(v, rho, eps, a), p0)
    x = np.where(np.abs(x - rho) < 1e-12, rho, x)
    _, h1, h2, h3 = _cluster_h(x, rho, eps, a)
    # derivatives of the inverse of h, then the chain rule through φ
    q1, q2, q3 = 1.0 / h1, -h2 / h1**3, -h3 / h1**4 + 3.0 * h2**2 / h1**5
    return x, q1 * p1, q2 * p1**2 + q1 * p2, q3 * p1**3 + 3.0 * q2 * p1 * p2 + q1 * p3


def to_chebyshev_coordinate(x: np.ndarray, m: int, stretch: float = 0.0, centre: float = 0.0) -> np.ndarray:
    """Return the Chebyshev coordinate ξ of points ``x`` under the map of ``build_radial_grid(m, stretch, centre)``."""
    x = np.asarray(x, dtype=float)
    if centre > 0.0:
        eps, a, gamma = _cluster_parameters(m, centre)
        return _invert_increasing(lambda v: _map_to_x(v, gamma), _cluster_h(x, centre, eps, a)[0])
    if stretch == 0.0:
        return x.copy()
    return _invert_increasing(lambda v: _map_to_x(v, stretch), x)


@lru_cache(maxsize=64)
def build_radial_grid(m: int, stretch: float = 0.0, centre: float = 0.0) -> RadialGrid:
    """Return the half grid of ``m`` nodes with its parity-reduced operators (cached).

    Parameters
    ----------
    m
        Number of nodes on ``(0, 1]``; the full grid has ``2m`` points.
    stretch
        β of the map ``x = (1 − β) ξ + β ξ³`` (0 ≤ β < 1; 0: Chebyshev points).
    centre
        ρ of the map clustered around ``x = ±ρ`` with a node at ρ (0 < ρ < 1; 0: none; see the
        module docstring). Only with ``stretch`` 0.
    """
    if not 0.0 <= stretch < 1.0:
        raise ValueError(f"stretch must be in [0, 1), got {stretch}")
    if not 0.0 <= centre < 1.0 or (centre > 0.0 and stretch != 0.0):
        raise ValueError(f"centre must be in [0, 1) and needs stretch 0, got centre {centre}, stretch {stretch}")
    n = 2 * m - 1
    xf, d = chebyshev_matrix(n)
    d2 = d @ d
    d3 = d2 @ d
    if centre > 0.0:
        x, g1, g2, g3 = _cluster_map(xf[:m], m, centre)
        x[0] = 1.0
    else:
        x, g1, g2, g3 = _map_to_x(xf[:m], stretch)
    ops: dict[str, dict[int, np.ndarray]] = {"d1": {}, "d2": {}, "d3": {}}
    for p in (1, -1):
        e1, e2, e3 = _reduce(d, m, p), _reduce(d2, m, p), _reduce(d3, m, p)
        # chain rule: d/dx = (1/g') d/dξ, and so on
        ops["d1"][p] = e1 / g1[:, None]
        ops["d2"][p] = e2 / g1[:, None] ** 2 - (g2 / g1**3)[:, None] * e1
        ops["d3"][p] = (e3 / g1[:, None] ** 3 - (3.0 * g2 / g1**4)[:, None] * e2
                        + (3.0 * g2**2 / g1**5 - g3 / g1**4)[:, None] * e1)
    for table in ops.values():
        for arr in table.values():
            arr.setflags(write=False)
    x.setflags(write=False)
    return RadialGrid(x=x, d1=ops["d1"], d2=ops["d2"], d3=ops["d3"],
                      integral=_GridWeights(m, stretch, centre, "integral"),
                      moment2=_GridWeights(m, stretch, centre, "moment2"), stretch=float(stretch), centre=float(centre))


class _GridWeights(Mapping[int, np.ndarray]):
    """Quadrature weights of :func:`build_radial_grid`'s grid, per parity, computed on first use."""

    def __init__(self, m: int, stretch: float, centre: float, which: str) -> None:
        self._key, self._which = (m, stretch, centre), which

    def __getitem__(self, parity: int) -> np.ndarray:
        return _build_quadrature_weights(*self._key)[self._which][parity]

    def __iter__(self) -> Iterator[int]:
        return iter((1, -1))

    def __len__(self) -> int:
        return 2


@lru_cache(maxsize=64)
def _build_quadrature_weights(m: int, stretch: float, centre: float) -> dict[str, dict[int, np.ndarray]]:
    """Return the ``integral`` and ``moment2`` weights of the grid (Gauss–Legendre, 4M + 8 points, cached)."""
    gl_x, gl_w = np.polynomial.legendre.leggauss(4 * m + 8)
    gl_x = 0.5 * (gl_x + 1.0)
    gl_w = 0.5 * gl_w
    gx, gx1, _, _ = _cluster_map(gl_x, m, centre) if centre > 0.0 else _map_to_x(gl_x, stretch)
    out: dict[str, dict[int, np.ndarray]] = {"integral": {}, "moment2": {}}
    for p in (1, -1):
        e = build_interpolation_matrix(m, p, gl_x)
        out["integral"][p] = (gl_w * gx1) @ e
        out["moment2"][p] = (gl_w * gx1 * gx**2) @ e
        out["integral"][p].setflags(write=False)
        out["moment2"][p].setflags(write=False)
    return out
