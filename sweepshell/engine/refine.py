"""Adaptive refinement: spend model evaluations along regime boundaries only.

Starting from the coarse grid of a store, on a view of two numeric axes (every other axis
fixed, each combination of their values in turn), refinement is a quadtree built level by
level in the coordinates where the axes are evenly spaced (log10 for log axes):

- level 0: every grid cell whose four corners carry at least two different trusted regimes
  is *mixed*;
- each mixed cell is split into four; the five new nodes (edge midpoints and centre) that
  are not known yet are evaluated in one batch per level and view; the children whose
  corners are mixed go on to the next level.

After L levels the boundary is resolved as finely as on a uniform grid 2^L times finer in
each direction, at a cost proportional to the boundary's length instead of the map's area
(common practice, no source). A boundary that enters and leaves a coarse cell between two
corners of the same regime (a feature smaller than the coarse spacing) is not seen.

New points go to the store's point list (:mod:`sweepshell.store.points`) with their level,
so queries, maps and boundaries use them. Points already in the list are reused, so running
``refine`` again with more levels only computes the new levels.
"""

from __future__ import annotations

import itertools
import logging
import os
import time
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from sweepshell.engine.evaluate import PointEvaluator, build_store_model
from sweepshell.errors import QueryError
from sweepshell.query.slicing import slice_sweep
from sweepshell.query.table import describe_fields, read_store_points
from sweepshell.query.view_grid import ViewGrid, read_view_grid
from sweepshell.store.reader import open_sweep

__all__ = ["RefineSummary", "describe_budget", "grid_crossings", "node_crossings", "refine_store"]

log = logging.getLogger(__name__)


@dataclass
class SliceRefinement:
    """The quadtree of one view: node codes by finest-level index, and what it cost."""

    fixed: dict[str, Any]
    x_unit: np.ndarray
    y_unit: np.ndarray
    levels: int
    nodes: dict[tuple[int, int], int] = field(default_factory=dict)
    evaluations: int = 0
    reused: int = 0
    per_level: list[int] = field(default_factory=list)


@dataclass(frozen=True)
class RefineSummary:
    """What a refinement did.

    Attributes
    ----------
    x_axis, y_axis
        The axes of the refined views.
    levels
        Levels of refinement (finest spacing = grid spacing / 2^levels).
    views
        Number of views (combinations of the other axes) refined.
    grid_points
        Grid points in those views.
    evaluations
        New model evaluations made.
    reused
        Points needed that were already in the store's point list.
    per_level
        New evaluations per level (summed over views).
    seconds
        Wall time.
    slices
        The quadtrees (for benchmarks and tests).
    """

    x_axis: str
    y_axis: str
    levels: int
    views: int
    grid_points: int
    evaluations: int
    reused: int
    per_level: tuple[int, ...]
    seconds: float
    slices: tuple[SliceRefinement, ...] = ()

    def to_line(self) -> str:
        """Return a one-line summary."""
        levels = ", ".join(f"L{i + 1}: {n}" for i, n in enumerate(self.per_level))
        uniform = self.views * _uniform_count(self)
        return (f"refined {self.views} view(s) of {self.x_axis} x {self.y_axis} by {self.levels} level(s): "
                f"{self.evaluations} new model evaluations ({levels}; {self.reused} reused) where a uniform grid "
                f"as fine would need {uniform}")


def _uniform_count(summary: RefineSummary) -> int:
    if not summary.slices:
        return 0
    s = summary.slices[0]
    f = 2 ** summary.levels
    return ((len(s.x_unit) - 1) * f + 1) * ((len(s.y_unit) - 1) * f + 1)


def _positions(grid: ViewGrid, axis: int, index: np.ndarray, levels: int) -> np.ndarray:
    """Axis values of finest-level node indices (grid values exactly where a node is on the grid)."""
    unit, values = (grid.x_unit, grid.x_values) if axis == 0 else (grid.y_unit, grid.y_values)
    step = 2 ** levels
    k = np.minimum(index // step, len(unit) - 2)
    frac = (index - k * step) / step
    u = unit[k] + frac * (unit[k + 1] - unit[k])
    out = grid.axis_values(axis, u)
    on_grid = frac == 0
    out[on_grid] = values[k[on_grid]]
    at_end = frac == 1
    out[at_end] = values[k[at_end] + 1]
    return out


def _mixed(codes: np.ndarray) -> np.ndarray:
    """Whether each row of corner codes holds two different trusted regimes (codes ≥ 0)."""
    trusted = codes >= 0
    low = np.where(trusted, codes, np.iinfo(np.int64).max).min(axis=1)
    high = np.where(trusted, codes, -1).max(axis=1)
    return high > low


def _refine_view(grid: ViewGrid, levels: int, evaluator: Any) -> SliceRefinement:
    """Build the quadtree of one view level by level, evaluating the nodes not known yet."""
    codes, known = grid.codes, grid.known
    state = SliceRefinement(fixed=dict(grid.fixed), x_unit=grid.x_unit, y_unit=grid.y_unit, levels=levels)
    step = 2 ** levels
    nx, ny = codes.shape
    gi, gj = np.meshgrid(np.arange(nx) * step, np.arange(ny) * step, indexing="ij")
    corners = np.stack([codes[:-1, :-1].ravel(), codes[1:, :-1].ravel(), codes[:-1, 1:].ravel(),
                        codes[1:, 1:].ravel()], axis=1)
    mixed = _mixed(corners)
    cells = np.stack([gi[:-1, :-1].ravel()[mixed], gj[:-1, :-1].ravel()[mixed]], axis=1)
    # only the corners of mixed cells are ever looked up: a large grid stays cheap to refine
    ci, cj = np.nonzero(mixed.reshape(nx - 1, ny - 1))
    for di, dj in ((0, 0), (1, 0), (0, 1), (1, 1)):
        state.nodes.update(zip(zip(((ci + di) * step).tolist(), ((cj + dj) * step).tolist(), strict=True),
                               codes[ci + di, cj + dj].tolist(), strict=True))
    size = step
    for level in range(1, levels + 1):
        if cells.size == 0:
            state.per_level.append(0)
            continue
        half = size // 2
        i, j = cells[:, 0], cells[:, 1]
        new = np.concatenate([np.stack([i + half, j], 1), np.stack([i + half, j + size], 1),
                              np.stack([i, j + half], 1), np.stack([i + size, j + half], 1),
                              np.stack([i + half, j + half], 1)])
        new = np.unique(new, axis=0)
        todo = np.array([k for k in map(tuple, new.tolist()) if k not in state.nodes], dtype=np.int64).reshape(-1, 2)
        xs = _positions(grid, 0, todo[:, 0], levels)
        ys = _positions(grid, 1, todo[:, 1], levels)
        stored = np.array([known.get((float(a), float(b)), -2) for a, b in zip(xs, ys, strict=True)], dtype=np.int64)
        reuse = stored != -2
        state.reused += int(reuse.sum())
        for key, code in zip(map(tuple, todo[reuse].tolist()), stored[reuse].tolist(), strict=True):
            state.nodes[key] = code
        ask = ~reuse
        got = np.empty(0, dtype=np.int64)
        if np.any(ask):
            evaluator.level = level
            got = np.asarray(evaluator(xs[ask], ys[ask]), dtype=np.int64)
        state.evaluations += int(ask.sum())
        state.per_level.append(int(ask.sum()))
        for key, code in zip(map(tuple, todo[ask].tolist()), got.tolist(), strict=True):
            state.nodes[key] = code
        children = np.concatenate([np.stack([i, j], 1), np.stack([i + half, j], 1), np.stack([i, j + half], 1),
                                   np.stack([i + half, j + half], 1)])
        look = state.nodes.__getitem__
        child_corners = np.array([[look((a, b)), look((a + half, b)), look((a, b + half)), look((a + half, b + half))]
                                  for a, b in children.tolist()], dtype=np.int64).reshape(-1, 4)
        cells = children[_mixed(child_corners)] if len(children) else children
        size = half
    return state


def refine_store(path: str | os.PathLike[str], *, x: str | None = None, y: str | None = None,
                 at: Mapping[str, str] | None = None, levels: int = 3, max_evaluations: int = 2_000_000,
                 record: bool = True) -> RefineSummary:
    """Refine a store's regime boundaries on views of two axes; return what was done.

    Parameters
    ----------
    path
        The store.
    x, y
        Axes of the views (default: the first two numeric axes with several values).
    at
        Fix other axes (nearest value) instead of refining every combination of their values.
    levels
        Levels of refinement (1–12).
    max_evaluations
        Refuse to go on once this many new evaluations would be needed (checked per level).
    record
        Append the new points to the store's point list.

    Raises
    ------
    QueryError
        For bad axes or levels, or when the evaluation budget would be exceeded.
    StoreMismatchError
        If the store was written by another version of the model.
    """
    if not 1 <= levels <= 12:
        raise QueryError(f"--levels={levels} must be between 1 and 12", field="levels", value=levels)
    t0 = time.perf_counter()
    ds = open_sweep(path)
    info = describe_fields(ds)
    numeric = [a for a in info.axes if ds[a].dtype.kind in "fiu" and ds.sizes[a] > 1]
    x = x or next((a for a in numeric if a != y), None)
    y = y or next((a for a in numeric if a != x), None)
    if x is None or y is None:
        raise QueryError("refinement needs two numeric axes with several values; this store has "
                         f"{', '.join(numeric) or 'none'}", field="axes")
    at = dict(at or {})
    others = [a for a in info.axes if a not in (x, y) and a not in at and ds.sizes[a] > 1]
    combos = list(itertools.product(*[[str(v) for v in ds[a].values] for a in others]))
    points = read_store_points(ds)
    model = build_store_model(ds.attrs)  # one model for every view
    slices = []
    total = 0
    for combo in combos:
        view = slice_sweep(ds, [x, y], {**at, **dict(zip(others, combo, strict=True))})
        grid = read_view_grid(view, x, y, points)
        points_of_view = PointEvaluator(path, ds.attrs, view.fixed_values, record=record, origin="refine",
                                        store_model=model)
        evaluator = _BudgetedEvaluator(points_of_view, x, y, max_evaluations - total)
        state = _refine_view(grid, levels, evaluator)
        total += state.evaluations
        slices.append(state)
        log.info("refined view %s: %d evaluations", view.describe_cuts(), state.evaluations)
    per_level = tuple(int(sum(s.per_level[i] for s in slices)) for i in range(levels))
    grid_points = len(slices) * ds.sizes[x] * ds.sizes[y]
    return RefineSummary(x_axis=x, y_axis=y, levels=levels, views=len(slices), grid_points=grid_points,
                         evaluations=total, reused=sum(s.reused for s in slices), per_level=per_level,
                         seconds=time.perf_counter() - t0, slices=tuple(slices))


class _BudgetedEvaluator:
    """Regime evaluator for one view that refuses to exceed the evaluation budget."""

    def __init__(self, evaluator: Any, x: str, y: str, budget: int) -> None:
        self._evaluator = evaluator
        self._regimes = evaluator.regimes_at(x, y)
        self._budget = budget
        self.level = 0

    def __call__(self, xs: np.ndarray, ys: np.ndarray) -> np.ndarray:
        if xs.size > self._budget:
            raise QueryError(f"refinement would need more than the allowed number of new evaluations "
                             f"(next level: {xs.size}, left: {self._budget}); use fewer --levels or raise "
                             "--max-evaluations", field="levels", value=xs.size)
        self._budget -= xs.size
        self._evaluator.level = self.level
        return np.asarray(self._regimes(xs, ys))


def node_crossings(state: SliceRefinement, a: int, b: int) -> np.ndarray:
    """Return the midpoints (unit coordinates, k × 2) of finest-level edges joining regimes a and b."""
    out = []
    step = 2 ** state.levels
    for (i, j), code in state.nodes.items():
        if code not in (a, b):
            continue
        for di, dj in ((1, 0), (0, 1)):
            other = state.nodes.get((i + di, j + dj))
            if other is not None and other in (a, b) and other != code:
                out.append((i + 0.5 * di, j + 0.5 * dj))
    if not out:
        return np.empty((0, 2))
    idx = np.asarray(out, dtype=float)

    def to_u(unit: np.ndarray, fine: np.ndarray) -> np.ndarray:
        k = np.minimum(np.floor(fine / step).astype(np.int64), len(unit) - 2)
        return unit[k] + (fine / step - k) * (unit[k + 1] - unit[k])

    return np.stack([to_u(state.x_unit, idx[:, 0]), to_u(state.y_unit, idx[:, 1])], axis=1)


def grid_crossings(x_unit: np.ndarray, y_unit: np.ndarray, codes: np.ndarray, a: int, b: int) -> np.ndarray:
    """Return the midpoints (unit coordinates) of grid edges joining regimes a and b on a uniform grid."""
    pairs = []
    for axis in (0, 1):
        lo = codes[:-1, :] if axis == 0 else codes[:, :-1]
        hi = codes[1:, :] if axis == 0 else codes[:, 1:]
        hit = ((lo == a) & (hi == b)) | ((lo == b) & (hi == a))
        i, j = np.nonzero(hit)
        if axis == 0:
            pairs.append(np.stack([0.5 * (x_unit[i] + x_unit[i + 1]), y_unit[j]], 1))
        else:
            pairs.append(np.stack([x_unit[i], 0.5 * (y_unit[j] + y_unit[j + 1])], 1))
    return np.concatenate(pairs) if pairs else np.empty((0, 2))


def describe_budget(summary: RefineSummary) -> str:
    """Return the saving against a uniform grid as fine as the refinement, e.g. ``31.2x fewer``."""
    uniform = summary.views * _uniform_count(summary)
    spent = summary.grid_points + summary.evaluations + summary.reused
    return (f"{uniform / max(spent, 1):.1f}x fewer evaluations than a uniform grid as fine "
            f"({spent} grid and refined points vs {uniform})")
