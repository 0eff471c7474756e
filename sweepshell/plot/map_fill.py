"""The filled field of a map: regime classes or an output's colours over two axes, refined by off-grid points.

Each point colours the region nearest to it, measured in the coordinates where the axes are
evenly spaced (log10 for log axes): on the grid alone these are the grid cells (regime classes
are smoothed so a region ends halfway between grid points of different regime); with the
store's point list the regions follow the boundary more closely.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import numpy as np

from sweepshell.models.base import Status
from sweepshell.plot.style import UNTRUSTED_COLOR
from sweepshell.plot.views import cell_edges
from sweepshell.query.boundary import slice_codes
from sweepshell.query.slicing import from_unit, to_unit
from sweepshell.store import metadata

if TYPE_CHECKING:
    import xarray as xr
    from matplotlib.axes import Axes

__all__ = ["bilinear_classes", "cmap_with_bad", "draw_field", "fill_codes", "refined_only"]

_MAX_CELLS = 250_000      # above this many grid cells (or with off-grid points) the fill is rasterised
_RASTER = 420             # raster size per axis (about the axes' size in pixels at 150 dpi / 1.5)


def _nearest_index(unit: np.ndarray, where: np.ndarray) -> np.ndarray:
    if len(unit) == 1:
        return np.zeros(len(where), dtype=np.intp)
    mid = 0.5 * (unit[1:] + unit[:-1])
    return np.searchsorted(mid, where)


def fill_codes(view: xr.Dataset) -> np.ndarray:
    """Regime code where trusted, −1 untrusted, −2 pending; shape (nx, ny)."""
    codes = slice_codes(view)
    status = np.asarray(view[metadata.STATUS_VAR].values)
    return np.where(status == Status.pending, -2, codes)


def refined_only(known: Mapping[str, np.ndarray] | None) -> dict[str, np.ndarray] | None:
    """Return the points of refinement levels ≥ 1: dense enough near boundaries to shape the fill.

    Bisection points alone sit on isolated grid edges; interpolating between them and distant
    grid points would draw triangles, so the fill then stays the grid's cells (the boundary
    lines still use every point).
    """
    if known is None or "level" not in known:
        return None
    keep = known["level"] >= 1
    if not np.any(keep):
        return None
    return {k: v[keep] for k, v in known.items()}


def cmap_with_bad() -> Any:
    """Return the sequential colour map of output fields, untrusted points (NaN) in the untrusted grey."""
    import matplotlib as mpl

    return mpl.colormaps["viridis"].with_extremes(bad=UNTRUSTED_COLOR)


def draw_field(ax: Axes, xu: np.ndarray, yu: np.ndarray, values: np.ndarray, log: tuple[bool, ...], *,
                known: Mapping[str, np.ndarray] | None, cmap: Any, vmin: float | None = None,
                vmax: float | None = None, norm: Any = None, classes: bool = False) -> Any:
    """Draw a field given on the grid (nx, ny); off-grid points refine it.

    Regime classes (``classes``) on a grid of at least 2 × 2 are drawn from bilinear
    interpolation of their indicators, so a region ends halfway between grid points of
    different regime, where the boundary lines run (no staircase of cells); other fields are
    drawn cell by cell.
    """
    smooth = classes and known is None and len(xu) > 1 and len(yu) > 1
    if known is None and values.size <= _MAX_CELLS and not smooth:
        ex, ey = from_unit(cell_edges(xu), log[0]), from_unit(cell_edges(yu), log[1])
        return ax.pcolormesh(ex, ey, values.T, cmap=cmap, vmin=vmin, vmax=vmax, norm=norm,
                             shading="flat", rasterized=True, linewidth=0)
    exu, eyu = cell_edges(xu), cell_edges(yu)
    rx = np.linspace(exu[0], exu[-1], _RASTER + 1)
    ry = np.linspace(eyu[0], eyu[-1], _RASTER + 1)
    cx, cy = 0.5 * (rx[1:] + rx[:-1]), 0.5 * (ry[1:] + ry[:-1])
    if smooth:
        raster = bilinear_classes(xu, yu, values, cx, cy)
    elif known is None:
        raster = values[_nearest_index(xu, cx)[:, None], _nearest_index(yu, cy)[None, :]]
    else:
        raster = _interpolate_classes(xu, yu, values, known, log, cx, cy)
    return ax.pcolormesh(from_unit(rx, log[0]), from_unit(ry, log[1]), raster.T, cmap=cmap, vmin=vmin, vmax=vmax,
                         norm=norm, shading="flat", rasterized=True, linewidth=0)


def bilinear_classes(xu: np.ndarray, yu: np.ndarray, values: np.ndarray, cx: np.ndarray,
                      cy: np.ndarray) -> np.ndarray:
    """Return the class on a raster: the largest bilinearly interpolated class indicator (grid only)."""
    ix = np.clip(np.searchsorted(xu, cx) - 1, 0, len(xu) - 2)
    iy = np.clip(np.searchsorted(yu, cy) - 1, 0, len(yu) - 2)
    tx = np.clip((cx - xu[ix]) / (xu[ix + 1] - xu[ix]), 0.0, 1.0)[:, None]
    ty = np.clip((cy - yu[iy]) / (yu[iy + 1] - yu[iy]), 0.0, 1.0)[None, :]
    present = np.unique(values)
    best = np.full((len(cx), len(cy)), -np.inf)
    raster = np.zeros((len(cx), len(cy)))
    for c in present:
        ind = (values == c).astype(float)
        weight = ((1 - tx) * (1 - ty) * ind[ix][:, iy] + tx * (1 - ty) * ind[ix + 1][:, iy]
                  + (1 - tx) * ty * ind[ix][:, iy + 1] + tx * ty * ind[ix + 1][:, iy + 1])
        better = weight > best
        raster[better] = c
        best[better] = weight[better]
    return raster


def _interpolate_classes(xu: np.ndarray, yu: np.ndarray, values: np.ndarray, known: Mapping[str, np.ndarray],
                         log: tuple[bool, ...], cx: np.ndarray, cy: np.ndarray) -> np.ndarray:
    """Return the class (regime code + 2) on a raster from grid and off-grid points.

    One-hot class indicators are interpolated linearly on the Delaunay triangulation of all
    points (in evenly-spaced units scaled to the unit square) and the largest wins, so a
    boundary runs between a pair of close points of different regime rather than along
    nearest-point cell edges.
    """
    from scipy.interpolate import LinearNDInterpolator

    sx, sy = max(float(np.ptp(xu)), 1e-300), max(float(np.ptp(yu)), 1e-300)
    gx, gy = np.meshgrid(xu, yu, indexing="ij")
    pts = np.concatenate([np.stack([gx.ravel(), gy.ravel()], 1),
                          np.stack([to_unit(known["x"], log[0]), to_unit(known["y"], log[1])], 1)])
    pts = (pts - [xu.min(), yu.min()]) / [sx, sy]
    classes = np.concatenate([values.ravel(), np.asarray(known["regime"], float) + 2]).astype(np.int64)
    present = np.unique(classes)
    onehot = (classes[:, None] == present[None, :]).astype(float)
    qx, qy = np.meshgrid((cx - xu.min()) / sx, (cy - yu.min()) / sy, indexing="ij")
    query = np.stack([np.clip(qx.ravel(), 0, 1), np.clip(qy.ravel(), 0, 1)], 1)
    weights = LinearNDInterpolator(pts, onehot, fill_value=0.0)(query)
    return present[np.argmax(weights, axis=1)].reshape(len(cx), len(cy)).astype(float)
