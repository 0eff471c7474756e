"""Regime maps (phase diagrams) and line plots of an output across a sweep.

A regime map fills each regime over two axes, with every other axis fixed. Each point
colours the region nearest to it, measured in the coordinates where the axes are evenly
spaced (log10 for log axes): on the grid alone these are the grid cells; with the store's
point list (refinement, bisection) the nearest-point regions follow the boundary more
closely. Boundaries between regimes are drawn from :mod:`sweepshell.query.boundary`, their
vertices narrowed by the stored off-grid points (no new model evaluations are made here).
"""

from __future__ import annotations

import logging
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, cast

import numpy as np

from sweepshell.errors import QueryError
from sweepshell.models.base import Status
from sweepshell.plot.layout import finish_figure
from sweepshell.plot.style import (
    BOUNDARY_COLOR,
    COLORBAR_AXES,
    CONTOUR_COLOR,
    FIELD_AXES,
    MAIN_AXES,
    OKABE_ITO,
    PENDING_COLOR,
    STATUS_MARKERS,
    UNTRUSTED_COLOR,
    axis_label,
    make_figure,
    regime_colors,
    study_subtitle,
    title_lines,
)
from sweepshell.plot.units import format_quantity, is_integer_valued, set_axis_format
from sweepshell.query.boundary import known_points, locate_boundary, slice_codes
from sweepshell.query.slicing import SweepSlice, from_unit, slice_sweep, to_unit
from sweepshell.query.table import describe_fields, read_store_points, regime_names
from sweepshell.store import metadata

if TYPE_CHECKING:
    import xarray as xr
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

__all__ = ["MapResult", "draw_output_lines", "draw_regime_map"]

log = logging.getLogger(__name__)

_MAX_CELLS = 250_000      # above this many grid cells (or with off-grid points) the fill is rasterised
_RASTER = 420             # raster size per axis (about the axes' size in pixels at 150 dpi / 1.5)
_MAX_CONTOUR = 400        # contour lines of an output are drawn from at most this many points per axis
_MAX_MARKERS = 20_000     # untrusted points drawn individually up to this many
_CONFIDENCE = "pattern_confidence"  # an output some models give: share of starts that reach the chosen state
_WEAK_CONFIDENCE = 0.5


@dataclass(frozen=True)
class MapResult:
    """A drawn figure and what it shows (for the command line to report)."""

    figure: Figure
    view: SweepSlice
    notes: tuple[str, ...] = ()


def _edges(unit: np.ndarray) -> np.ndarray:
    if len(unit) == 1:
        return np.array([unit[0] - 0.5, unit[0] + 0.5])
    mid = 0.5 * (unit[1:] + unit[:-1])
    return np.concatenate([[unit[0] - (mid[0] - unit[0])], mid, [unit[-1] + (unit[-1] - mid[-1])]])


def _nearest_index(unit: np.ndarray, where: np.ndarray) -> np.ndarray:
    if len(unit) == 1:
        return np.zeros(len(where), dtype=np.intp)
    mid = 0.5 * (unit[1:] + unit[:-1])
    return np.searchsorted(mid, where)


def _fill_codes(view: xr.Dataset) -> np.ndarray:
    """Regime code where trusted, −1 untrusted, −2 pending; shape (nx, ny)."""
    codes = slice_codes(view)
    status = np.asarray(view[metadata.STATUS_VAR].values)
    return np.where(status == Status.pending, -2, codes)


def _check_numeric(view: SweepSlice) -> None:
    for name in view.axes:
        if view.ds[name].dtype.kind not in "fiu":
            raise QueryError(f"axis {name!r} holds names; draw it with --at {name}=NAME or as the line axis of "
                             "`--y OUTPUT`", field="axis", value=name)


def draw_regime_map(ds: xr.Dataset, x: str, y: str, *, color: str | None = None, contour: str | None = None,
                    at: Mapping[str, str] | None = None, show_points: bool = False,
                    boundaries: bool = True, caution: bool = True, ax: Axes | None = None) -> MapResult:
    """Draw the regime map of a store over axes ``x`` and ``y``.

    Parameters
    ----------
    ds
        A store Dataset.
    x, y
        Axes of the map; the other axes are fixed by ``at`` (nearest value) or at their first value.
    color
        ``None``/``"regime"`` for regime regions, or a scalar output drawn as a colour field
        (regime boundaries still drawn on top).
    contour
        A scalar output drawn as labelled contour lines.
    at
        ``name → value`` text fixing the other axes.
    show_points
        Mark the off-grid points of the store's point list.
    boundaries
        Draw the boundaries between regimes.
    caution
        Draw the caution footer (it is kept in the file's metadata either way).
    ax
        Draw into these matplotlib axes (the caller's figure: colour bar beside them, legend
        to their right, no caution footer); a new figure of the house style when ``None``.

    Raises
    ------
    QueryError
        For an unknown axis or output, an axis that holds names, or a colour field without
        a single value in the view.
    """
    info = describe_fields(ds)
    for name in (x, y):
        if name not in info.axes:
            raise QueryError(f"{name!r} is not an axis of this store; its axes are {', '.join(info.axes)}",
                             field="axis", value=name, allowed=", ".join(info.axes))
    checks: tuple[tuple[str, str | None], ...] = (("--color", color), ("--contour", contour))
    for what, var in checks:
        if var not in (None, "regime") and var not in info.scalar_outputs:
            raise QueryError(f"{what} {var!r} is not a scalar output; use one of "
                             f"{', '.join(info.scalar_outputs)}", field=what, value=var,
                             allowed=", ".join(info.scalar_outputs))
    view = slice_sweep(ds, [x, y], at)
    _check_numeric(view)
    regimes = regime_names(ds)
    xv = np.asarray(view.ds[x].values, float)
    yv = np.asarray(view.ds[y].values, float)
    xu, yu = to_unit(xv, view.log[0]), to_unit(yv, view.log[1])
    codes = _fill_codes(view.ds)
    status = np.asarray(view.ds[metadata.STATUS_VAR].values)
    points = read_store_points(ds)
    known = known_points(points, view.fixed_values, x, y)
    continuous = color not in (None, "regime")
    own = ax is None
    if ax is None:
        fig = make_figure()
        ax = fig.add_axes(FIELD_AXES if continuous else MAIN_AXES)
    else:
        fig = cast("Figure", ax.figure)
    handles: list[Any] = []
    notes: list[str] = []

    from matplotlib.colors import ListedColormap
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    fill_colors = [PENDING_COLOR, UNTRUSTED_COLOR, *regime_colors(len(regimes))]
    if continuous:
        assert color is not None
        field_values = np.asarray(view.ds[color].values, float)
        field_values = np.where(codes >= 0, field_values, np.nan)
        check_has_values(view, color, field_values, codes)
        cmap = _cmap_with_bad()
        finite = field_values[np.isfinite(field_values)]
        norm = None
        if finite.size and finite.min() > 0 and finite.max() / finite.min() > 100:
            from matplotlib.colors import LogNorm

            norm = LogNorm(finite.min(), finite.max())  # values over decades read better on a log scale
        mesh = _draw_field(ax, xu, yu, field_values, view.log, known=None, cmap=cmap, norm=norm)
        cax = fig.add_axes(COLORBAR_AXES) if own else None
        cbar = fig.colorbar(mesh, cax=cax) if cax is not None else fig.colorbar(mesh, ax=ax)
        cax = cbar.ax
        shown = set_axis_format(cax.yaxis, str(view.ds[color].attrs.get("units", "")), finite,
                                log=norm is not None, integer=is_integer_valued(finite))
        cbar.set_label(axis_label(color, dict(view.ds[color].attrs), shown))
    else:
        cmap = ListedColormap(fill_colors)
        _draw_field(ax, xu, yu, codes.astype(float) + 2, view.log, known=_refined_only(known), cmap=cmap, vmin=-0.5,
                    vmax=len(fill_colors) - 0.5, classes=True)
        present = set(np.unique(codes).tolist())
        if known is not None:
            present |= set(np.unique(known["regime"]).tolist())
        for i, name in enumerate(regimes):
            if i in present:
                handles.append(Patch(facecolor=fill_colors[i + 2], edgecolor="#777777", linewidth=0.5,
                                     label=name.replace("_", " ")))
        if -1 in present:
            handles.append(Patch(facecolor=UNTRUSTED_COLOR, edgecolor="#777777", linewidth=0.5,
                                 label="no trusted result"))
        if -2 in present:
            handles.append(Patch(facecolor=PENDING_COLOR, edgecolor="#777777", linewidth=0.5,
                                 label="not computed yet"))

    boundary_lines: list[np.ndarray] = []
    if boundaries:
        boundary_lines = _draw_boundaries(ax, view, codes, regimes, known, x, y, xv, yv)
        if boundary_lines:
            handles.append(Line2D([], [], color=BOUNDARY_COLOR, linewidth=1.4, label="regime boundary"))
    if contour:
        values = np.where(codes >= 0, np.asarray(view.ds[contour].values, float), np.nan)
        sx, sy = (max(1, -(-n // _MAX_CONTOUR)) for n in values.shape)  # thin very fine grids
        values, cxv, cyv = values[::sx, ::sy], xv[::sx], yv[::sy]
        if np.isfinite(values).sum() >= 4 and np.nanmax(values) > np.nanmin(values):
            cs = ax.contour(cxv, cyv, values.T, levels=7, colors=CONTOUR_COLOR, linewidths=0.8,
                            linestyles="--")
            units = str(view.ds[contour].attrs.get("units", ""))
            positions = _label_positions(cs, boundary_lines, view.log)
            ax.clabel(cs, fontsize=7, fmt=lambda v: format_quantity(v, units), inline_spacing=3,
                      manual=positions if positions else False)
            handles.append(Line2D([], [], color=CONTOUR_COLOR, linewidth=0.8, linestyle="--",
                                  label=f"{contour.replace('_', ' ')} (contours)"))
    handles += _draw_status_markers(ax, xv, yv, status, notes)
    if not continuous and _CONFIDENCE in view.ds:
        handles += _draw_uncertain(ax, view, codes, xv, yv)
    if show_points and known is not None:
        ax.scatter(known["x"], known["y"], s=2.0, c="#000000", alpha=0.45, linewidths=0, zorder=3)
        handles.append(Line2D([], [], marker=".", linestyle="none", color="#000000", alpha=0.6,
                              label=f"off-grid points ({len(known['x'])})"))
    ax.set_xscale("log" if view.log[0] else "linear")
    ax.set_yscale("log" if view.log[1] else "linear")
    ex, ey = from_unit(_edges(xu)[[0, -1]], view.log[0]), from_unit(_edges(yu)[[0, -1]], view.log[1])
    ax.set_xlim(ex[0], ex[1])
    ax.set_ylim(ey[0], ey[1])
    label_axes(ax, view, x, y, xv, yv)
    title = "Regime map" if not continuous else f"{str(color).replace('_', ' ')} with regime boundaries"
    ax.set_title(title_lines(dict(ds.attrs), title, study_subtitle(ds, view.cuts)), fontsize=9.5, loc="left")
    if handles and continuous and own:  # right of the colour bar and its labels, moving with it
        cax = fig.axes[-1]
        box = cax.get_window_extent()
        tight = cax.get_tightbbox(fig.canvas.get_renderer())  # type: ignore[attr-defined]
        right = tight.x1 if tight is not None else box.x1
        cax.legend(handles=handles, loc="upper left", bbox_to_anchor=((right - box.x0) / box.width + 1.0, 1.0),
                   fontsize=8.5, frameon=False, borderaxespad=0.0)
    elif handles:
        ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize=8.5, frameon=False,
                  borderaxespad=0.0)
    if own:
        finish_figure(fig, caution=caution)
    return MapResult(fig, view, tuple(notes))


def label_axes(ax: Axes, view: SweepSlice, x: str, y: str, xv: np.ndarray, yv: np.ndarray) -> None:
    """Label and format the two axes of a map by the units rule of :mod:`sweepshell.plot.units`."""
    for axis, name, values, log in ((ax.xaxis, x, xv, view.log[0]), (ax.yaxis, y, yv, view.log[1])):
        attrs = dict(view.ds[name].attrs)
        shown = set_axis_format(axis, str(attrs.get("units", "")), values, log=log,
                                integer=not log and is_integer_valued(values))
        axis.set_label_text(axis_label(name, attrs, shown))
    ax.tick_params(direction="out", labelsize=9)


def check_has_values(view: SweepSlice, output: str, values: np.ndarray, codes: np.ndarray) -> None:
    """Raise :class:`QueryError` when ``output`` has no value anywhere in the view (nothing to draw).

    The message says why: no trusted point, or an output that is NaN at every trusted point
    (with what NaN means for it).
    """
    if np.isfinite(values).any():
        return
    where = view.describe_cuts() or "the whole store"
    trusted = int(np.sum(codes >= 0))
    if trusted == 0:
        raise QueryError(f"no point of this view ({where}) has a trusted result, so {output} has nothing to "
                         "draw; check `sweepshell status STORE` or choose other --at values", field="y",
                         value=output)
    meaning = str(view.ds[output].attrs.get("long_name", "")).strip()
    raise QueryError(f"{output} is NaN at all {trusted} trusted points of this view ({where})"
                     f"{'; it means: ' + meaning if meaning else ''}; choose another output or other --at values",
                     field="y", value=output)


def _draw_uncertain(ax: Axes, view: SweepSlice, codes: np.ndarray, xv: np.ndarray, yv: np.ndarray) -> list[Any]:
    """Mark points whose pattern most starts did not reach (several states compete there)."""
    from matplotlib.lines import Line2D

    confidence = np.asarray(view.ds[_CONFIDENCE].values, float)
    weak = (codes >= 0) & (confidence < _WEAK_CONFIDENCE)
    if not np.any(weak):
        return []
    ix, iy = np.nonzero(weak)
    ax.scatter(xv[ix], yv[iy], marker="D", s=14, facecolors="none", edgecolors="#1A1A1A", linewidths=0.8,
               zorder=5)
    return [Line2D([], [], marker="D", linestyle="none", markersize=4.5, markerfacecolor="none",
                   markeredgecolor="#1A1A1A", label=f"multistable ({int(weak.sum())}: under half\nof the starts "
                                                    "reach this pattern)")]


def _refined_only(known: Mapping[str, np.ndarray] | None) -> dict[str, np.ndarray] | None:
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


def _cmap_with_bad() -> Any:
    import matplotlib as mpl

    return mpl.colormaps["viridis"].with_extremes(bad=UNTRUSTED_COLOR)


def _draw_field(ax: Axes, xu: np.ndarray, yu: np.ndarray, values: np.ndarray, log: tuple[bool, ...], *,
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
        ex, ey = from_unit(_edges(xu), log[0]), from_unit(_edges(yu), log[1])
        return ax.pcolormesh(ex, ey, values.T, cmap=cmap, vmin=vmin, vmax=vmax, norm=norm,
                             shading="flat", rasterized=True, linewidth=0)
    exu, eyu = _edges(xu), _edges(yu)
    rx = np.linspace(exu[0], exu[-1], _RASTER + 1)
    ry = np.linspace(eyu[0], eyu[-1], _RASTER + 1)
    cx, cy = 0.5 * (rx[1:] + rx[:-1]), 0.5 * (ry[1:] + ry[:-1])
    if smooth:
        raster = _bilinear_classes(xu, yu, values, cx, cy)
    elif known is None:
        raster = values[_nearest_index(xu, cx)[:, None], _nearest_index(yu, cy)[None, :]]
    else:
        raster = _interpolate_classes(xu, yu, values, known, log, cx, cy)
    return ax.pcolormesh(from_unit(rx, log[0]), from_unit(ry, log[1]), raster.T, cmap=cmap, vmin=vmin, vmax=vmax,
                         norm=norm, shading="flat", rasterized=True, linewidth=0)


def _bilinear_classes(xu: np.ndarray, yu: np.ndarray, values: np.ndarray, cx: np.ndarray,
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


def _draw_boundaries(ax: Axes, view: SweepSlice, codes: np.ndarray, regimes: tuple[str, ...],
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


def _label_positions(cs: Any, boundary_lines: Sequence[np.ndarray], log: tuple[bool, ...]) -> list[tuple[float, float]]:
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


def _draw_status_markers(ax: Axes, xv: np.ndarray, yv: np.ndarray, status: np.ndarray, notes: list[str]) -> list[Any]:
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


def draw_output_lines(ds: xr.Dataset, x: str, output: str, *, series: str | None = None,
                      at: Mapping[str, str] | None = None, max_series: int = 12,
                      caution: bool = True) -> MapResult:
    """Draw ``output`` against axis ``x``, one line per value of the ``series`` axis.

    Without ``series`` the first other axis with 2 to ``max_series`` values (not fixed by ``at``)
    gives the lines. A numeric series takes its colours from a sequential map with a colour
    bar naming the values; named values get distinct colours and a legend. Outputs holding
    whole numbers only are drawn as steps. Untrusted points leave gaps and are marked with
    ``x`` along the bottom.

    Raises
    ------
    QueryError
        For an unknown axis or output, or an output without a single value in the view.
    """
    info = describe_fields(ds)
    if x not in info.axes:
        raise QueryError(f"--x {x!r} is not an axis of this store; its axes are {', '.join(info.axes)}",
                         field="x", value=x)
    if output not in info.scalar_outputs:
        raise QueryError(f"--y {output!r} is neither an axis nor a scalar output; outputs are "
                         f"{', '.join(info.scalar_outputs)}", field="y", value=output)
    at = dict(at or {})
    if series is None:
        for name in info.axes:
            if name != x and name not in at and 2 <= ds.sizes[name] <= max_series:
                series = name
                break
    elif series not in info.axes or series == x:
        raise QueryError(f"--color {series!r} must be another axis (one line per value); axes are "
                         f"{', '.join(info.axes)}", field="color", value=series)
    keep: Sequence[str] = [x] if series is None else [x, series]
    view = slice_sweep(ds, keep, at)
    if view.ds[x].dtype.kind not in "fiu":
        raise QueryError(f"--x {x!r} holds names; choose a numeric axis", field="x", value=x)
    codes = slice_codes(view.ds)
    values = np.where(codes >= 0, np.asarray(view.ds[output].values, float), np.nan)
    xv = np.asarray(view.ds[x].values, float)
    check_has_values(view, output, values, codes)
    fig = make_figure(7.4, 5.0)
    numeric_series = series is not None and view.ds[series].dtype.kind in "fiu"
    ax = fig.add_axes((0.085, 0.22, 0.7 if series is None else (0.64 if numeric_series else 0.68), 0.66))
    n_lines = 1 if series is None else view.ds.sizes[series]
    if values.ndim == 1:
        values = values[:, None]
        codes = codes[:, None]
    integer = is_integer_valued(values)
    if numeric_series:
        assert series is not None
        colors = _series_colorbar(fig, ax, view, series)
    else:
        colors = [OKABE_ITO[(i + 5) % len(OKABE_ITO)] if n_lines == 1 else OKABE_ITO[i % len(OKABE_ITO)]
                  for i in range(n_lines)]
    markers = "osD^vP*"
    from matplotlib.transforms import blended_transform_factory

    rug = blended_transform_factory(ax.transData, ax.transAxes)
    any_bad = False
    for j in range(n_lines):
        label = None
        if series is not None and not numeric_series:
            label = str(view.ds[series].values[j]).replace("_", " ")
        marker = "o" if numeric_series else markers[j % len(markers)]
        # whole-number outputs (wave numbers, mode counts) change in steps: drawn as steps, never sloped
        ax.plot(xv, values[:, j], color=colors[j], linewidth=1.6, marker=marker, markersize=3.5, label=label,
                drawstyle="steps-mid" if integer else "default")
        bad = codes[:, j] < 0
        if np.any(bad):
            any_bad = True
            ax.plot(xv[bad], np.full(bad.sum(), 0.02 + 0.025 * (j % 4)), linestyle="none", marker="x",
                    markersize=5, color=colors[j], transform=rug, clip_on=False)
    ax.set_xscale("log" if view.log[0] else "linear")
    shown_x = set_axis_format(ax.xaxis, str(view.ds[x].attrs.get("units", "")), xv, log=view.log[0],
                              integer=not view.log[0] and is_integer_valued(xv))
    shown_y = set_axis_format(ax.yaxis, str(view.ds[output].attrs.get("units", "")), values[np.isfinite(values)],
                              integer=integer)
    ax.set_xlabel(axis_label(x, dict(view.ds[x].attrs), shown_x))
    ax.set_ylabel(axis_label(output, dict(view.ds[output].attrs), shown_y))
    ax.grid(True, color="#E5E5E5", linewidth=0.6)
    ax.tick_params(direction="out", labelsize=9)
    ax.set_title(title_lines(dict(ds.attrs), f"{output.replace('_', ' ')} across {x.replace('_', ' ')}",
                             study_subtitle(ds, view.cuts)), fontsize=10, loc="left")
    if series is not None and not numeric_series:
        leg = ax.legend(title=axis_label(series, dict(view.ds[series].attrs)), fontsize=8.5, title_fontsize=8.5,
                        frameon=False, loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0)
        leg.get_title().set_horizontalalignment("left")
    notes = ["x marks along the bottom: points without a trusted result"] if any_bad else []
    finish_figure(fig, caution=caution)
    return MapResult(fig, view, tuple(notes))


def _series_colorbar(fig: Figure, ax: Axes, view: SweepSlice, series: str) -> list[Any]:
    """Colour the lines of a numeric series axis from a sequential map, with a colour bar naming the values."""
    import matplotlib as mpl
    from matplotlib.cm import ScalarMappable
    from matplotlib.colors import BoundaryNorm, ListedColormap
    from matplotlib.ticker import FixedLocator, NullLocator

    values = np.asarray(view.ds[series].values, float)
    log = view.log[1]
    colors = [mpl.colormaps["viridis"](t) for t in np.linspace(0.0, 0.88, len(values))]
    order = np.argsort(values)
    edges = from_unit(_edges(to_unit(values[order], log)), log)
    mappable = ScalarMappable(norm=BoundaryNorm(edges, len(values)),
                              cmap=ListedColormap([colors[k] for k in order]))
    pos = ax.get_position()
    cax = fig.add_axes((pos.x1 + 0.02, pos.y0, 0.018, pos.height))
    cbar = fig.colorbar(mappable, cax=cax, spacing="uniform")
    attrs = dict(view.ds[series].attrs)
    shown = set_axis_format(cax.yaxis, str(attrs.get("units", "")), values, digits=3)
    cax.yaxis.set_major_locator(FixedLocator(values[order].tolist()))
    cax.yaxis.set_minor_locator(NullLocator())
    cbar.set_label(axis_label(series, attrs, shown))
    return colors
