"""The moment–curvature path of a curved strip's section, and its inversion on the rising branch.

Non-dimensional throughout (k = κw²/h, m = M w/(D h); see ``theory.md``). Points sharing
(c, ν, sense) share one path, so :func:`solve_paths` takes the distinct triples only.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from sweepshell.models.curved_strip.section import (
    SectionOperators,
    find_fold,
    find_peak,
    make_section_operators,
    solve_sections,
)

__all__ = ["invert_moment", "solve_paths"]

#: curvature k = κw²/h added to the natural curvature c when sizing the path (plate bending of a flat strip)
_FLAT_RANGE = 20.0
#: first curvature k = κw²/h of the search grid
_GRID_START = 0.05
_NEWTON_STEPS = 30


def solve_paths(s: Mapping[str, Any], c: np.ndarray, nu: np.ndarray, p: np.ndarray) -> dict[str, np.ndarray]:
    """Follow the moment–curvature path of each distinct (c, ν, sense); non-dimensional results."""
    ops = make_section_operators(s["modes"])
    m = c.size
    k_max = s["curvature_range"] * (c + _FLAT_RANGE)
    # geometric from k = 0.05: the limit point sits at k ≈ 4–6 whatever c, the fold near k = c
    grid = np.exp(np.linspace(np.log(_GRID_START), np.log(k_max), s["curvature_samples"], axis=-1))
    cc, nn, pp = (v[:, None] for v in (c, nu, p))
    dense = solve_sections(ops, cc, nn, pp, grid)
    initial = solve_sections(ops, c, nu, p, np.zeros(m))
    gain = initial.tangent / (1.0 - nu**2)
    k_peak, has_peak = find_peak(ops, c, nu, p, grid, dense.tangent)
    k_fold, _ = find_fold(ops, c, nu, p, grid, dense.moment, dense.energy, k_peak)
    nan_k = np.where(np.isfinite(k_peak), k_peak, 0.0)
    nan_f = np.where(np.isfinite(k_fold), k_fold, 0.0)
    peak = solve_sections(ops, c, nu, p, nan_k)
    fold = solve_sections(ops, c, nu, p, nan_f)
    m_peak = np.where(has_peak, peak.moment, np.nan)
    m_fold = np.where(np.isfinite(k_fold), fold.moment, np.nan)
    converged = _converged(s, ops, c, nu, p, nan_k, nan_f, k_max)
    # stored path: to twice the fold curvature, or the whole range without a fold
    k_end = np.where(np.isfinite(k_fold), np.minimum(2.0 * nan_f, k_max), k_max)
    path_k = _sample_path(grid, dense.moment, k_end, s["path_samples"])
    path_m = solve_sections(ops, cc, nn, pp, path_k).moment
    natural = c[:, None] * ops.natural[None, :]
    a_peak = np.where(has_peak[:, None], peak.modal, np.nan)
    a_fold = np.where(np.isfinite(k_fold)[:, None], fold.modal, np.nan)
    return {"c": c, "nu": nu, "p": p, "gain": gain, "k_peak": k_peak, "m_peak": m_peak, "has_peak": has_peak,
            "k_fold": k_fold, "m_fold": m_fold, "converged": converged, "path_k": path_k, "path_m": path_m,
            "a_natural": natural, "a_peak": a_peak, "a_fold": a_fold, "k_max": k_max,
            "m_max": dense.moment[:, -1]}


def _converged(s: Mapping[str, Any], ops: SectionOperators, c: np.ndarray, nu: np.ndarray, p: np.ndarray,
               k_peak: np.ndarray, k_fold: np.ndarray, k_max: np.ndarray) -> np.ndarray:
    """Whether the peak, fold and end moments agree with the leading 3/4 of the basis and the fold layer is resolved.

    ``k_peak`` and ``k_fold`` hold 0 where there is no peak or fold (nothing to check there).
    """
    cc, nn, pp = (v[:, None] for v in (c, nu, p))
    low = max(2, (3 * s["modes"]) // 4)
    probe = np.stack([k_peak, k_fold, k_max], axis=1)
    full = solve_sections(ops, cc, nn, pp, probe).moment
    coarse = solve_sections(make_section_operators(low), cc, nn, pp, probe).moment
    with np.errstate(invalid="ignore", divide="ignore"):
        change = np.abs(coarse - full) / np.maximum(np.abs(full), 1e-300)
    change = np.where(probe > 0.0, change, 0.0)
    # both bases miss an edge layer thinner than the basis can represent: require it resolved outright
    layer = (12.0 * (1.0 - nu**2)) ** -0.25 / np.sqrt(np.maximum(np.maximum(k_fold, c), 1.0))
    resolved = layer * (2.0 * s["modes"]) ** 2 >= s["layer_resolution"]
    return np.all(change <= s["tolerance"], axis=1) & resolved


def _sample_path(grid: np.ndarray, moment: np.ndarray, k_end: np.ndarray, samples: int) -> np.ndarray:
    """Return curvatures from 0 to ``k_end`` spaced evenly in the arc length of (k/k_end, m/m_top) on the grid path."""
    m = grid.shape[0]
    knots = np.concatenate([np.zeros((m, 1)), grid], axis=1)
    moments = np.concatenate([np.zeros((m, 1)), moment], axis=1)
    inside = knots <= k_end[:, None]
    top = np.max(np.where(inside, moments, 0.0), axis=1)
    dk = np.diff(knots, axis=1) / k_end[:, None]
    dm = np.diff(moments, axis=1) / top[:, None]
    seg = np.where(inside[:, 1:], np.hypot(dk, dm), 0.0)
    arc = np.concatenate([np.zeros((m, 1)), np.cumsum(seg, axis=1)], axis=1)
    want = np.linspace(0.0, 1.0, samples)[None, :] * arc[:, -1:]
    return np.stack([np.interp(want[i], arc[i], np.minimum(knots[i], k_end[i])) for i in range(m)])


def invert_moment(modes: int, c: np.ndarray, nu: np.ndarray, p: np.ndarray,
                   clipped: np.ndarray, k_top: np.ndarray, stiffness0: np.ndarray) -> np.ndarray:
    """Return k with m(k) = target on the rising branch [0, k_top] (bracketed Newton, vectorised).

    ``clipped`` is the target limited to the branch's top; rows of shape ``(n, G)``.
    """
    ops = make_section_operators(modes)
    shape = clipped.shape
    cc, nn, pp = (np.broadcast_to(v[:, None], shape) for v in (c, nu, p))
    lo = np.zeros(shape)
    hi = np.broadcast_to(k_top[:, None], shape).copy()
    k = np.minimum(clipped / stiffness0[:, None], hi)
    active = np.ones(shape, dtype=bool)
    for _ in range(_NEWTON_STEPS):
        st = solve_sections(ops, cc, nn, pp, k)
        f = st.moment - clipped
        lo = np.where(active & (f < 0.0), k, lo)
        hi = np.where(active & (f >= 0.0), k, hi)
        with np.errstate(divide="ignore", invalid="ignore"):
            step = k - f / st.tangent
        inside = (st.tangent > 0.0) & (step > lo) & (step < hi)
        k_new = np.where(active, np.where(inside, step, 0.5 * (lo + hi)), k)
        # a converged entry stops moving, so its answer never depends on the batch
        active &= np.abs(k_new - k) > 1e-13 * np.maximum(k, 1.0)
        k = k_new
        if not active.any():
            break
    return k
