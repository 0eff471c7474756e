"""Stability operators of the shallow-cap modes on the two-domain grid split at a sharp mismatch edge.

Notation of :mod:`.modes`. On the grid of :mod:`sweepshell.numerics.radial_two_domain` each
side has its own polynomial and the two share the value at ρ. The mode equations are of
fourth order and the hoop prestress of the state jumps at ρ, so ``w⁗`` jumps there while
``w … w'''`` (and ``Φ … Φ'''``) are continuous; the continuity of the first, second and third
derivatives takes the rows of ρ's outer neighbour, ρ and its inner neighbour (so each side
collocates its equation at all of its other nodes but the two edge rows). The jumping
coefficient never enters an interface row; every other row samples its own side's value.

Wave number 1 with a sliding edge differs: the stress function ``Φ = x³ φ`` has one edge
condition and one regular solution on the inner side (``x³``), so the inner neighbour of ρ
collocates the stress equation and the interface row it would hold moves to row 1 (which,
with one edge condition, collocates on the single grid): :func:`add_sliding_n1_row` adds that
row's coupling to the deflection, which the compiled assembly (written for interface rows
shared by both fields) leaves out. With the interface row at ρ's inner neighbour the stress
operator of that case is singular (the gauge ``Φ = x`` solves the outer side and a spurious
polynomial the inner one).
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

from sweepshell.numerics.radial_two_domain import build_split_grid

__all__ = ["add_sliding_n1_row", "build_split_field_rows", "sliding_n1_stress"]


@lru_cache(maxsize=64)
def _split_parts(size: int, m: int, pv: int, split: float, outer: int) -> tuple[np.ndarray, ...]:
    """Return the n-independent parts of the operators of ``x^m v`` (cached).

    ``u0 … u3`` (derivatives of ``x^m v`` by Leibniz) and three parts of the bilaplacian:
    x² ∇⁴_n u = x² u⁗ + 2x u‴ − (2n² + 1)(u″ − u′/x) + (n⁴ − 4n²) u/x².
    """
    g = build_split_grid(size, split, outer)
    assert g.d4 is not None
    x = g.x
    d = [np.eye(size), g.d1[pv], g.d2[pv], g.d3[pv], g.d4[pv]]
    power = [math.perm(m, k) * x ** max(m - k, 0) for k in range(5)]  # k-th derivative of x^m
    u = [sum(math.comb(k, j) * power[k - j][:, None] * d[j] for j in range(k + 1)) for k in range(5)]
    return (u[0], u[1], u[2], u[3], (x**2)[:, None] * u[4] + (2.0 * x)[:, None] * u[3],
            u[2] - u[1] / x[:, None], u[0] / (x**2)[:, None])


def build_split_field_rows(size: int, n: int, m: int, split: float, outer: int) -> tuple[np.ndarray, ...]:
    """Return ``(w0, w1, w2, w3_edge, bilaplacian, bracket, inner_rows)`` of ``x^m v``, wave number ``n``.

    The fields of :class:`.field_operators.FieldOperators` on the grid ``build_split_grid(size, split,
    outer)``: rows ρ − 1, ρ, ρ + 1 (indices ``outer − 1 … outer + 1``) of ``bilaplacian`` hold
    the interface conditions (scaled to unit largest entry), those of ``bracket`` and ``w2`` are
    zero; ``inner_rows`` keeps the collocation rows of ``bilaplacian``, ``bracket``, ``w2`` at
    ρ's inner neighbour (for :func:`add_sliding_n1_row`).
    """
    g = build_split_grid(size, split, outer)
    assert g.jumps is not None
    x, p = g.x, g.interface
    pv = 1 if (n - m) % 2 == 0 else -1
    u0, u1, u2, u3, top, middle, low = _split_parts(size, m, pv, split, outer)
    n2 = n * n
    bilaplacian = top - (2 * n2 + 1) * middle + (n2 * n2 - 4 * n2) * low
    bracket = x[:, None] * u1 - n2 * u0
    w2 = u2.copy()
    inner_rows = np.stack([bilaplacian[p + 1], bracket[p + 1], w2[p + 1]])
    for row, jump in zip((p - 1, p, p + 1), g.jumps[pv], strict=True):
        bilaplacian[row] = jump / np.abs(jump).max()
        bracket[row] = 0.0
        w2[row] = 0.0
    return u0, u1, w2, u3[0].copy(), bilaplacian, bracket, inner_rows


def sliding_n1_stress(s: np.ndarray, bilaplacian: np.ndarray, inner_rows: np.ndarray, p: int) -> None:
    """Set rows of a sliding n = 1 stress block ``s``: row 1 an interface row, ρ's inner neighbour collocated."""
    s[1], s[p + 1] = bilaplacian[p + 1], inner_rows[0]


def add_sliding_n1_row(a: np.ndarray, inner_rows: np.ndarray, x: np.ndarray, p: int, reduction: np.ndarray,
                       zeta1: np.ndarray, zeta2: np.ndarray) -> None:
    """Add ``B S⁻¹`` times the ``C`` row of ρ's inner neighbour to reduced matrices ``a`` ``(k, M, M)`` in place.

    ``inner_rows`` are the deflection's (:func:`build_split_field_rows`), ``reduction`` the
    states' ``[P₁; P₂] S⁻¹`` ``(k, 2M, M)``, ``zeta1``, ``zeta2`` their surface slope and
    curvature ``(k, M)``; rows 0, 1 of ``B`` are edge rows (zero).
    """
    m = a.shape[1]
    col = zeta2 * reduction[:, :m, p + 1] + (x * zeta1) * reduction[:, m:, p + 1]
    col[:, :2] = 0.0
    c_row = zeta2[:, p + 1:p + 2] * inner_rows[1] + (x[p + 1] * zeta1[:, p + 1:p + 2]) * inner_rows[2]
    a += col[:, :, None] * c_row[:, None, :]
