"""Two-domain Chebyshev collocation of radial functions with a kink at ``x = ρ``.

A solution whose equation has a coefficient that jumps at an interior radius ρ (the sharp
edge of a mismatch-strain region) is analytic on ``[0, ρ]`` and on ``[ρ, 1]`` but not across
ρ; one polynomial over ``[0, 1]`` converges to it only algebraically. Here each side has its
own Chebyshev grid and its own polynomial: the inner side ``[−ρ, ρ]`` the parity half grid of
:mod:`sweepshell.numerics.radial_chebyshev` scaled by ρ (``x = ρ cos(π j/(2q − 1))``,
``j = 0 … q−1``, regular at the axis), the outer side the Chebyshev–Gauss–Lobatto points of
``[ρ, 1]`` (``p + 1`` of them). The node ρ is shared, so the unknowns are the values at the
``M = p + q`` distinct nodes, ordered from ``x = 1`` down as on the single grid (edge row at
index 0, ρ at index ``p``); the shared value makes every field continuous at ρ. Each side's
derivative matrices are those of its own interpolant (exact for polynomials of the side), so
a row at a node other than ρ involves only the nodes of its side. Nothing couples the two
polynomials but the shared value and the *interface rows* an equation puts in place of some
of its collocation rows:

* a second-order equation in conservation form, ``(x u')' + …`` (the once-integrated
  axisymmetric cap equations), keeps one row at ρ: the mean of its two one-sided collocations,
  weighted by the Gauss–Lobatto end weights ``ω_o``, ``ω_i`` of the sides, plus the flux jump
  ``ρ (u'_o − u'_i)/(ω_o + ω_i)`` — the equation a spectral-element (Galerkin) discretisation
  gives at a shared node. The exact solution satisfies it (both one-sided equations hold and
  ``u'`` is continuous); the row's form, pointwise terms at ρ included, is that of a
  collocation row, so the same kernels handle it. ``d1 … d4`` at ρ hold that weighted mean,
  ``jumps`` the one-sided differences and ``flux_weight`` the factor ``ρ/(ω_o + ω_i)``.
* a fourth-order equation (the buckling modes, whose hoop prestress jumps at ρ: ``u⁗`` jumps,
  ``u … u'''`` do not) replaces its collocation rows at ρ and its two neighbours by the
  continuity of ``u'``, ``u''``, ``u'''`` (rows of ``jumps``).

The jumping coefficient itself is sampled one-sidedly: at a node other than ρ it has its
side's value, and no interface row uses it. The piecewise interpolant converges spectrally
on each side, so results converge geometrically in ``M`` (tested on the sharp-edged mismatch
strain in ``tests/models/shallow_cap/test_mismatch_sharp.py``).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from sweepshell.numerics.radial_chebyshev import RadialGrid, build_interpolation_matrix, chebyshev_matrix

__all__ = ["build_split_grid", "get_split_counts"]


def get_split_counts(m: int, outer_share: float) -> tuple[int, int]:
    """Return ``(p, q)``: the outer grid's order (``p + 1`` nodes on ``[ρ, 1]``) and the inner half-grid size.

    ``p + q = m``, ``p ≈ outer_share·m``, with at least six nodes on the outer side (two edge
    rows, three interface rows and a collocation row of a fourth-order equation) and four on
    the inner one.
    """
    p = min(max(6, round(outer_share * m)), m - 4)
    return p, m - p


def _powers(d: np.ndarray) -> list[np.ndarray]:
    out = [d]
    for _ in range(3):
        out.append(out[-1] @ d)
    return out


def _lobatto_interpolation(p: int, t: np.ndarray) -> np.ndarray:
    """Return the matrix evaluating the interpolant on the Lobatto points of order ``p`` at ``t`` in [−1, 1]."""
    xf = np.cos(np.pi * np.arange(p + 1) / p)
    wb = (-1.0) ** np.arange(p + 1)
    wb[0] *= 0.5
    wb[-1] *= 0.5
    diff = t[:, None] - xf[None, :]
    exact = np.isclose(diff, 0.0, atol=1e-15)
    diff[exact] = 1.0
    k = wb[None, :] / diff
    out: np.ndarray = k / k.sum(axis=1, keepdims=True)
    rows = np.nonzero(exact.any(axis=1))[0]
    out[rows] = exact[rows].astype(float)
    return out


@lru_cache(maxsize=64)
def build_split_grid(m: int, rho: float, outer: int) -> RadialGrid:
    """Return the two-domain grid of ``m`` nodes split at ``ρ`` (cached; see the module docstring).

    Parameters
    ----------
    m
        Number of distinct nodes on ``(0, 1]`` (``x[0] = 1``; ``x[p] = ρ``).
    rho
        The split radius, 0 < ρ < 1.
    outer
        Order p of the outer grid: ``p + 1`` nodes on ``[ρ, 1]``, ``m − p`` on ``(0, ρ]``
        (:func:`get_split_counts`).

    Returns
    -------
    RadialGrid
        With ``split`` = ρ, ``interface`` = p, derivative matrices ``d1 … d4`` of both parities
        (one-sided at every node but ρ, the weighted mean there), ``jumps`` (rows
        ``u^(k)_o(ρ) − u^(k)_i(ρ)``, k = 1, 2, 3, per parity), ``flux_weight`` and the quadrature
        rows ``integral``, ``moment2`` (Gauss–Legendre on each side, exact for the piecewise
        interpolant).
    """
    if not 0.0 < rho < 1.0 or not 6 <= outer <= m - 4:
        raise ValueError(f"split grid needs 0 < rho < 1 and 6 <= outer <= m - 4; got rho {rho}, m {m}, outer {outer}")
    p, q = outer, m - outer
    half = 0.5 * (1.0 - rho)
    t_out, d_out = chebyshev_matrix(p)
    x = np.concatenate([0.5 * (1.0 + rho) + half * t_out, rho * np.cos(np.pi * np.arange(1, q) / (2 * q - 1))])
    x[0], x[p] = 1.0, rho
    d_outer = [dk / half ** (k + 1) for k, dk in enumerate(_powers(d_out))]
    n_in = 2 * q - 1
    _, d_in = chebyshev_matrix(n_in)
    inner_full = [dk / rho ** (k + 1) for k, dk in enumerate(_powers(d_in))]
    w_out = half * 2.0 / (p * (p + 1))
    w_in = rho * 2.0 / (n_in * (n_in + 1))
    gl, gw = np.polynomial.legendre.leggauss(2 * m + 8)
    t = 0.5 * (gl + 1.0)
    e_out = _lobatto_interpolation(p, 2.0 * t - 1.0)  # columns: the outer nodes from x = 1 down to ρ
    pts_out, wts_out = rho + (1.0 - rho) * t, (1.0 - rho) * 0.5 * gw
    pts_in, wts_in = rho * t, rho * 0.5 * gw
    ops: dict[str, dict[int, np.ndarray]] = {f"d{k}": {} for k in (1, 2, 3, 4)}
    ops.update(integral={}, moment2={})
    jumps: dict[int, np.ndarray] = {}
    for par in (1, -1):
        mats = []
        for k in range(4):
            inner = inner_full[k][:q, :q] + par * inner_full[k][:q, n_in - np.arange(q)]
            d = np.zeros((m, m))
            d[:p, :p + 1] = d_outer[k][:p]
            d[p + 1:, p:] = inner[1:]
            row_o, row_i = np.zeros(m), np.zeros(m)
            row_o[:p + 1] = d_outer[k][p]
            row_i[p:] = inner[0]
            d[p] = (w_out * row_o + w_in * row_i) / (w_out + w_in)
            mats.append((d, row_o - row_i))
            d.setflags(write=False)
            ops[f"d{k + 1}"][par] = d
        jump = np.stack([mats[k][1] for k in range(3)])
        jump.setflags(write=False)
        jumps[par] = jump
        e_in = build_interpolation_matrix(q, par, pts_in / rho)
        integral, moment2 = np.zeros(m), np.zeros(m)
        integral[p:] += wts_in @ e_in
        moment2[p:] += (wts_in * pts_in**2) @ e_in
        integral[:p + 1] += wts_out @ e_out
        moment2[:p + 1] += (wts_out * pts_out**2) @ e_out
        for key, row in (("integral", integral), ("moment2", moment2)):
            row.setflags(write=False)
            ops[key][par] = row
    x.setflags(write=False)
    return RadialGrid(x=x, d1=ops["d1"], d2=ops["d2"], d3=ops["d3"], integral=ops["integral"],
                      moment2=ops["moment2"], split=float(rho), interface=p, d4=ops["d4"], jumps=jumps,
                      flux_weight=rho / (w_out + w_in))
