"""Regime maps (phase diagrams) of a sweep over two of its axes.

A regime map fills each regime over two axes, with every other axis fixed (the fill:
:mod:`sweepshell.plot.map_fill`). Boundaries between regimes are drawn from
:mod:`sweepshell.query.boundary`, their vertices narrowed by the stored off-grid points (no new
model evaluations are made here); status markers, contours and multistable points go on top
(:mod:`sweepshell.plot.map_marks`). Line plots of an output live in
:mod:`sweepshell.plot.output_lines`.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, cast

import numpy as np

from sweepshell.errors import QueryError
from sweepshell.plot.layout import finish_figure
from sweepshell.plot.map_fill import cmap_with_bad, draw_field, fill_codes, refined_only
from sweepshell.plot.map_marks import (
    CONFIDENCE,
    draw_boundaries,
    draw_status_markers,
    draw_uncertain,
    label_positions,
)
from sweepshell.plot.output_lines import draw_output_lines
from sweepshell.plot.style import (
    BOUNDARY_COLOR,
    COLORBAR_AXES,
    CONTOUR_COLOR,
    FIELD_AXES,
    MAIN_AXES,
    PENDING_COLOR,
    UNTRUSTED_COLOR,
    axis_label,
    make_figure,
    regime_colors,
    study_subtitle,
    title_lines,
)
from sweepshell.plot.units import format_quantity, is_integer_valued, set_axis_format
from sweepshell.plot.views import MapResult, cell_edges, check_has_values, label_axes
from sweepshell.query.boundary import known_points
from sweepshell.query.slicing import SweepSlice, from_unit, slice_sweep, to_unit
from sweepshell.query.table import describe_fields, read_store_points, regime_names
from sweepshell.store import metadata

if TYPE_CHECKING:
    import xarray as xr
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

__all__ = ["MapResult", "draw_output_lines", "draw_regime_map"]

_MAX_CONTOUR = 400        # contour lines of an output are drawn from at most this many points per axis


@dataclass(frozen=True)
class _Grid:
    """The view of a map and what every layer of it reads: axis values, evenly spaced units, codes, points."""

    view: SweepSlice
    x: str
    y: str
    xv: np.ndarray
    yv: np.ndarray
    xu: np.ndarray
    yu: np.ndarray
    codes: np.ndarray
    status: np.ndarray
    regimes: tuple[str, ...]
    known: dict[str, np.ndarray] | None


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
    _check_map_fields(ds, x, y, color, contour)
    grid = _read_grid(ds, x, y, at)
    continuous = color not in (None, "regime")
    own = ax is None
    if ax is None:
        fig = make_figure()
        ax = fig.add_axes(FIELD_AXES if continuous else MAIN_AXES)
    else:
        fig = cast("Figure", ax.figure)
    notes: list[str] = []
    if continuous:
        assert color is not None
        _draw_color_field(fig, ax, grid, color, own)
        handles: list[Any] = []
    else:
        handles = _draw_regime_fill(ax, grid)
    boundary_lines: list[np.ndarray] = []
    if boundaries:
        boundary_lines = draw_boundaries(ax, grid.view, grid.codes, grid.regimes, grid.known, x, y, grid.xv, grid.yv)
        if boundary_lines:
            from matplotlib.lines import Line2D

            handles.append(Line2D([], [], color=BOUNDARY_COLOR, linewidth=1.4, label="regime boundary"))
    if contour:
        handles += _draw_contours(ax, grid, contour, boundary_lines)
    handles += draw_status_markers(ax, grid.xv, grid.yv, grid.status, notes)
    if not continuous and CONFIDENCE in grid.view.ds:
        handles += draw_uncertain(ax, grid.view, grid.codes, grid.xv, grid.yv)
    if show_points and grid.known is not None:
        handles.append(_draw_known_points(ax, grid.known))
    _frame_axes(ax, grid)
    title = "Regime map" if not continuous else f"{str(color).replace('_', ' ')} with regime boundaries"
    ax.set_title(title_lines(dict(ds.attrs), title, study_subtitle(ds, grid.view.cuts)), fontsize=9.5, loc="left")
    _place_legend(fig, ax, handles, beside_colorbar=continuous and own)
    if own:
        finish_figure(fig, caution=caution)
    return MapResult(fig, grid.view, tuple(notes))


def _check_map_fields(ds: xr.Dataset, x: str, y: str, color: str | None, contour: str | None) -> None:
    """Refuse map axes that are not axes of the store, and colour or contour fields that are not scalar outputs."""
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


def _read_grid(ds: xr.Dataset, x: str, y: str, at: Mapping[str, str] | None) -> _Grid:
    """Cut the store to the map's two axes and read what the layers of the map draw."""
    view = slice_sweep(ds, [x, y], at)
    _check_numeric(view)
    xv = np.asarray(view.ds[x].values, float)
    yv = np.asarray(view.ds[y].values, float)
    known = known_points(read_store_points(ds), view.fixed_values, x, y)
    return _Grid(view=view, x=x, y=y, xv=xv, yv=yv, xu=to_unit(xv, view.log[0]), yu=to_unit(yv, view.log[1]),
                 codes=fill_codes(view.ds), status=np.asarray(view.ds[metadata.STATUS_VAR].values),
                 regimes=regime_names(ds), known=known)


def _draw_color_field(fig: Figure, ax: Axes, grid: _Grid, color: str, own: bool) -> None:
    """Draw an output as a colour field (trusted points only) with its colour bar; log colours over decades."""
    view = grid.view
    field_values = np.asarray(view.ds[color].values, float)
    field_values = np.where(grid.codes >= 0, field_values, np.nan)
    check_has_values(view, color, field_values, grid.codes)
    finite = field_values[np.isfinite(field_values)]
    norm = None
    if finite.size and finite.min() > 0 and finite.max() / finite.min() > 100:
        from matplotlib.colors import LogNorm

        norm = LogNorm(finite.min(), finite.max())  # values over decades read better on a log scale
    mesh = draw_field(ax, grid.xu, grid.yu, field_values, view.log, known=None, cmap=cmap_with_bad(), norm=norm)
    cax = fig.add_axes(COLORBAR_AXES) if own else None
    cbar = fig.colorbar(mesh, cax=cax) if cax is not None else fig.colorbar(mesh, ax=ax)
    cax = cbar.ax
    shown = set_axis_format(cax.yaxis, str(view.ds[color].attrs.get("units", "")), finite,
                            log=norm is not None, integer=is_integer_valued(finite))
    cbar.set_label(axis_label(color, dict(view.ds[color].attrs), shown))


def _draw_regime_fill(ax: Axes, grid: _Grid) -> list[Any]:
    """Fill the regions of each regime (untrusted and pending points in their greys); return the legend patches."""
    from matplotlib.colors import ListedColormap
    from matplotlib.patches import Patch

    fill_colors = [PENDING_COLOR, UNTRUSTED_COLOR, *regime_colors(len(grid.regimes))]
    draw_field(ax, grid.xu, grid.yu, grid.codes.astype(float) + 2, grid.view.log, known=refined_only(grid.known),
               cmap=ListedColormap(fill_colors), vmin=-0.5, vmax=len(fill_colors) - 0.5, classes=True)
    present = set(np.unique(grid.codes).tolist())
    if grid.known is not None:
        present |= set(np.unique(grid.known["regime"]).tolist())
    handles: list[Any] = []
    for i, name in enumerate(grid.regimes):
        if i in present:
            handles.append(Patch(facecolor=fill_colors[i + 2], edgecolor="#777777", linewidth=0.5,
                                 label=name.replace("_", " ")))
    if -1 in present:
        handles.append(Patch(facecolor=UNTRUSTED_COLOR, edgecolor="#777777", linewidth=0.5,
                             label="no trusted result"))
    if -2 in present:
        handles.append(Patch(facecolor=PENDING_COLOR, edgecolor="#777777", linewidth=0.5,
                             label="not computed yet"))
    return handles


def _draw_contours(ax: Axes, grid: _Grid, contour: str, boundary_lines: list[np.ndarray]) -> list[Any]:
    """Draw labelled contour lines of an output at trusted points (labels kept off the boundaries)."""
    from matplotlib.lines import Line2D

    view = grid.view
    values = np.where(grid.codes >= 0, np.asarray(view.ds[contour].values, float), np.nan)
    sx, sy = (max(1, -(-n // _MAX_CONTOUR)) for n in values.shape)  # thin very fine grids
    values, cxv, cyv = values[::sx, ::sy], grid.xv[::sx], grid.yv[::sy]
    if not (np.isfinite(values).sum() >= 4 and np.nanmax(values) > np.nanmin(values)):
        return []
    cs = ax.contour(cxv, cyv, values.T, levels=7, colors=CONTOUR_COLOR, linewidths=0.8, linestyles="--")
    units = str(view.ds[contour].attrs.get("units", ""))
    positions = label_positions(cs, boundary_lines, view.log)
    ax.clabel(cs, fontsize=7, fmt=lambda v: format_quantity(v, units), inline_spacing=3,
              manual=positions if positions else False)
    return [Line2D([], [], color=CONTOUR_COLOR, linewidth=0.8, linestyle="--",
                   label=f"{contour.replace('_', ' ')} (contours)")]


def _draw_known_points(ax: Axes, known: dict[str, np.ndarray]) -> Any:
    """Mark the off-grid points of the store's point list; return their legend handle."""
    from matplotlib.lines import Line2D

    ax.scatter(known["x"], known["y"], s=2.0, c="#000000", alpha=0.45, linewidths=0, zorder=3)
    return Line2D([], [], marker=".", linestyle="none", color="#000000", alpha=0.6,
                  label=f"off-grid points ({len(known['x'])})")


def _frame_axes(ax: Axes, grid: _Grid) -> None:
    """Set the scales, the limits (the outer cell edges) and the labels of the two axes."""
    log = grid.view.log
    ax.set_xscale("log" if log[0] else "linear")
    ax.set_yscale("log" if log[1] else "linear")
    ex, ey = from_unit(cell_edges(grid.xu)[[0, -1]], log[0]), from_unit(cell_edges(grid.yu)[[0, -1]], log[1])
    ax.set_xlim(ex[0], ex[1])
    ax.set_ylim(ey[0], ey[1])
    label_axes(ax, grid.view, grid.x, grid.y, grid.xv, grid.yv)


def _place_legend(fig: Figure, ax: Axes, handles: list[Any], *, beside_colorbar: bool) -> None:
    """Put the legend right of the map, or right of the colour bar and its labels (moving with it)."""
    if handles and beside_colorbar:
        cax = fig.axes[-1]
        box = cax.get_window_extent()
        tight = cax.get_tightbbox(fig.canvas.get_renderer())  # type: ignore[attr-defined]
        right = tight.x1 if tight is not None else box.x1
        cax.legend(handles=handles, loc="upper left", bbox_to_anchor=((right - box.x0) / box.width + 1.0, 1.0),
                   fontsize=8.5, frameon=False, borderaxespad=0.0)
    elif handles:
        ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize=8.5, frameon=False,
                  borderaxespad=0.0)
