"""What a map draws over its fill: regime boundaries, contour label places, status markers, multistable points."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from sweepshell.models.base import Status
from sweepshell.plot.style import BOUNDARY_COLOR, STATUS_MARKERS
from sweepshell.query.boundary import locate_boundary
from sweepshell.query.slicing import SweepSlice, to_unit

if TYPE_CHECKING:
    from matplotlib.axes import Axes

__all__ = ["CONFIDENCE", "draw_boundaries", "draw_status_markers", "draw_uncertain", "label_positions"]

_MAX_MARKERS = 20_000     # untrusted points drawn individually up to this many
CONFIDENCE = "pattern_confidence"  # an output some models give: share of starts that reach the chosen state
_WEAK_CONFIDENCE = 0.5


def draw_boundaries(ax: Axes, view: SweepSlice, codes: np.ndarray, regimes: tuple[str, ...],
                     known: Mapping[str, np.ndarray] | None, x: str, y: str, xv: np.ndarray,
                     yv: np.ndarray) -> list[np.ndarray]:
    """Draw every boundary between two regimes present; return the drawn polylines (k × 2, data units)."""
    from matplotlib import patheffects

    halo = [patheffects.withStroke(linewidth=3.0, foreground="white", alpha=0.8)]  # readable on any fill
    drawn: list[np.ndarray] = []
    present = [r for r in range(len(regimes)) if np.any(codes == r)]
    for i, a in enumerate(present):
        for b in present[i + 1:]:
            boundary = locate_boundary(x, y, xv, yv, (view.log[0], view.log[1]), codes, regimes,
                                       (regimes[a], regimes[b]), known=known, evaluate=None, bisections=0)
            for line in boundary.lines:
                ax.plot(line.x, line.y, color=BOUNDARY_COLOR, linewidth=1.4, solid_capstyle="round", zorder=4,
                        path_effects=halo)
                drawn.append(np.stack([np.asarray(line.x, float), np.asarray(line.y, float)], 1))
    return drawn


def label_positions(cs: Any, boundary_lines: Sequence[np.ndarray], log: tuple[bool, ...]) -> list[tuple[float, float]]:
    """Return one label position per contour level: the vertex farthest from boundaries and the frame.

    Measured in the evenly spaced units of the axes, scaled to the unit square, so labels never
    sit on a regime boundary when the level has room elsewhere.
    """
    segments = [seg for level in cs.allsegs for seg in level if len(seg)]
    if not segments:
        return []
    every = np.concatenate(segments)
    ux, uy = to_unit(every[:, 0], log[0]), to_unit(every[:, 1], log[1])
    lo = np.array([ux.min(), uy.min()])
    span = np.maximum(np.array([ux.max(), uy.max()]) - lo, 1e-300)

    def unit(points: np.ndarray) -> np.ndarray:
        return (np.stack([to_unit(points[:, 0], log[0]), to_unit(points[:, 1], log[1])], 1) - lo) / span

    avoid = unit(np.concatenate(boundary_lines)) if boundary_lines else np.empty((0, 2))
    positions = []
    for level in cs.allsegs:
        if not any(len(seg) for seg in level):
            continue
        points = np.concatenate([seg for seg in level if len(seg)])
        u = unit(points)
        room = np.minimum.reduce([u[:, 0], 1 - u[:, 0], u[:, 1], 1 - u[:, 1]]) * 2.0  # keep off the frame
        if len(avoid):
            room = np.minimum(room, np.min(np.hypot(u[:, None, 0] - avoid[None, :, 0],
                                                    u[:, None, 1] - avoid[None, :, 1]), axis=1))
        k = int(np.argmax(room))
        positions.append((float(points[k, 0]), float(points[k, 1])))
    return positions


def draw_status_markers(ax: Axes, xv: np.ndarray, yv: np.ndarray, status: np.ndarray, notes: list[str]) -> list[Any]:
    """Mark the points of each untrusted status; return their legend handles (a note when too many to mark)."""
    from matplotlib.lines import Line2D

    handles = []
    for name, (marker, size, label) in STATUS_MARKERS.items():
        where = status == Status[name]
        count = int(where.sum())
        if not count:
            continue
        ix, iy = np.nonzero(where)
        if count <= _MAX_MARKERS:
            filled = marker in ("x", "+")
            if filled:  # line-only markers take their colour from c
                ax.scatter(xv[ix], yv[iy], marker=marker, s=size, linewidths=0.9, zorder=5, c="#000000")
            else:
                ax.scatter(xv[ix], yv[iy], marker=marker, s=size, linewidths=0.9, zorder=5, facecolors="none",
                           edgecolors="#000000")
            handles.append(Line2D([], [], marker=marker, linestyle="none", markersize=5,
                                  markerfacecolor="#000000" if filled else "none", markeredgecolor="#000000",
                                  color="#000000", label=f"{label} ({count})"))
        else:
            notes.append(f"{count} {label} points not marked individually (shown grey)")
    return handles


def draw_uncertain(ax: Axes, view: SweepSlice, codes: np.ndarray, xv: np.ndarray, yv: np.ndarray) -> list[Any]:
    """Mark points whose pattern most starts did not reach (several states compete there)."""
    from matplotlib.lines import Line2D

    confidence = np.asarray(view.ds[CONFIDENCE].values, float)
    weak = (codes >= 0) & (confidence < _WEAK_CONFIDENCE)
    if not np.any(weak):
        return []
    ix, iy = np.nonzero(weak)
    ax.scatter(xv[ix], yv[iy], marker="D", s=14, facecolors="none", edgecolors="#1A1A1A", linewidths=0.8,
               zorder=5)
    return [Line2D([], [], marker="D", linestyle="none", markersize=4.5, markerfacecolor="none",
                   markeredgecolor="#1A1A1A", label=f"multistable ({int(weak.sum())}: under half\nof the starts "
                                                    "reach this pattern)")]
