"""Values and derivatives of ``x^m v`` on the shallow cap's radial grids, the pieces of its mode operators.

The deflection and stress function of a ``cos nθ`` mode are written ``x^m v`` (:mod:`.modes`);
here are the matrices that map the half-grid values of ``v`` to those of ``x^m v``, its first
three derivatives (the third only on the edge row), ``x² ∇⁴_n`` and the radial part of the
bracket, on a single radial grid (:func:`~sweepshell.numerics.radial_chebyshev.build_radial_grid`)
or the two-domain grid (:func:`~.split_modes.build_split_field_rows`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from sweepshell.models.shallow_cap.split_modes import build_split_field_rows
from sweepshell.numerics.array_cache import cache_arrays
from sweepshell.numerics.radial_chebyshev import build_radial_grid

__all__ = ["FieldOperators", "build_field_operators"]


@dataclass(frozen=True)
class FieldOperators:
    """Values and derivatives of ``x^m v`` (rows: nodes, columns: half-grid values of ``v``)."""

    w0: np.ndarray
    w1: np.ndarray
    w2: np.ndarray
    w3_edge: np.ndarray
    bilaplacian: np.ndarray  # x² ∇⁴_n (x^m v)
    bracket: np.ndarray  # x (x^m v)' − n² x^m v, the radial part of x² [ζ₀-like, ·]
    inner_rows: np.ndarray | None = None  # two-domain grid: bilaplacian, bracket, w2 rows at ρ's inner neighbour


def build_field_operators(size: int, n: int, m: int, stretch: float, centre: float, split: float = 0.0,
                          outer: int = 0) -> FieldOperators:
    """Return the operators of ``x^m v`` for wave number ``n`` on the grid ``(size, stretch, centre, split, outer)``."""
    if split > 0.0:
        w0, w1, w2, w3_edge, bilaplacian, bracket, inner_rows = build_split_field_rows(size, n, m, split, outer)
        return FieldOperators(w0=w0, w1=w1, w2=w2, w3_edge=w3_edge, bilaplacian=bilaplacian, bracket=bracket,
                              inner_rows=inner_rows)
    g = build_radial_grid(size, stretch, centre)
    x = g.x
    pv = 1 if (n - m) % 2 == 0 else -1
    pn = 1 if n % 2 == 0 else -1
    d1, d2, d3 = g.d1[pv], g.d2[pv], g.d3[pv]
    xm = x**m
    eye = np.eye(size)
    w0 = np.diag(xm)
    w1 = np.diag(m * x ** (m - 1)) + xm[:, None] * d1
    w2 = np.diag(m * (m - 1) * x ** (m - 2)) + (2 * m * x ** (m - 1))[:, None] * d1 + xm[:, None] * d2
    w3_edge = m * (m - 1) * (m - 2) * eye[0] + 3 * m * (m - 1) * d1[0] + 3 * m * d2[0] + d3[0]
    # x² ∇⁴_n (x^m v) = (O − n²)(L₀ + (m² − n²) x^(m−2)): the product O L₀ does not depend on n
    ol, o, l0 = _build_bilaplacian_parts(size, m, pv, pn, stretch, centre)
    nn, xs = n * n, x ** (m - 2)
    bilaplacian = ol + (m * m - nn) * (o * xs[None, :]) - nn * l0 - (nn * (m * m - nn)) * np.diag(xs)
    return FieldOperators(w0=w0, w1=w1, w2=w2, w3_edge=w3_edge, bilaplacian=bilaplacian,
                          bracket=x[:, None] * w1 - n * n * w0)


@cache_arrays(64 * 2**20)
def _build_bilaplacian_parts(size: int, m: int, pv: int, pn: int, stretch: float,
                             centre: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return ``(O L₀, O, L₀)``: ``O = x² d²/dx² + x d/dx`` (parity ``pn``), ``L₀`` the n-free part of x² ∇²_n x^m.

    One matrix product per (m, parities) instead of one per wave number: a stability grid of
    3M nodes builds 30 wave numbers' operators for each of its two fields.
    """
    g = build_radial_grid(size, stretch, centre)
    x = g.x
    o = (x**2)[:, None] * g.d2[pn] + x[:, None] * g.d1[pn]
    l0 = (x ** (m - 2))[:, None] * ((x**2)[:, None] * g.d2[pv] + ((2 * m + 1) * x)[:, None] * g.d1[pv])
    parts = o @ l0, o, l0
    for part in parts:
        part.setflags(write=False)
    return parts
