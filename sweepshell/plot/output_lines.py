"""Line plots of an output across one axis of a sweep, one line per value of another axis."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from sweepshell.errors import QueryError
from sweepshell.plot.layout import finish_figure
from sweepshell.plot.style import OKABE_ITO, axis_label, make_figure, study_subtitle, title_lines
from sweepshell.plot.units import is_integer_valued, set_axis_format
from sweepshell.plot.views import MapResult, cell_edges, check_has_values
from sweepshell.query.boundary import slice_codes
from sweepshell.query.slicing import SweepSlice, from_unit, slice_sweep, to_unit
from sweepshell.query.table import describe_fields

if TYPE_CHECKING:
    import xarray as xr
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

__all__ = ["draw_output_lines"]


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
    at = dict(at or {})
    series = _choose_series(ds, x, output, series, at, max_series)
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
    if values.ndim == 1:
        values = values[:, None]
        codes = codes[:, None]
    integer = is_integer_valued(values)
    any_bad = _draw_lines(fig, ax, view, series, xv, values, codes, integer)
    _label_line_axes(ax, view, x, output, xv, values, integer)
    ax.set_title(title_lines(dict(ds.attrs), f"{output.replace('_', ' ')} across {x.replace('_', ' ')}",
                             study_subtitle(ds, view.cuts)), fontsize=10, loc="left")
    if series is not None and not numeric_series:
        leg = ax.legend(title=axis_label(series, dict(view.ds[series].attrs)), fontsize=8.5, title_fontsize=8.5,
                        frameon=False, loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0)
        leg.get_title().set_horizontalalignment("left")
    notes = ["x marks along the bottom: points without a trusted result"] if any_bad else []
    finish_figure(fig, caution=caution)
    return MapResult(fig, view, tuple(notes))


def _choose_series(ds: xr.Dataset, x: str, output: str, series: str | None, at: Mapping[str, str],
                   max_series: int) -> str | None:
    """Check ``x`` and ``output``; return the series axis (given, or the first other axis with few values)."""
    info = describe_fields(ds)
    if x not in info.axes:
        raise QueryError(f"--x {x!r} is not an axis of this store; its axes are {', '.join(info.axes)}",
                         field="x", value=x)
    if output not in info.scalar_outputs:
        raise QueryError(f"--y {output!r} is neither an axis nor a scalar output; outputs are "
                         f"{', '.join(info.scalar_outputs)}", field="y", value=output)
    if series is None:
        for name in info.axes:
            if name != x and name not in at and 2 <= ds.sizes[name] <= max_series:
                return name
        return None
    if series not in info.axes or series == x:
        raise QueryError(f"--color {series!r} must be another axis (one line per value); axes are "
                         f"{', '.join(info.axes)}", field="color", value=series)
    return series


def _draw_lines(fig: Figure, ax: Axes, view: SweepSlice, series: str | None, xv: np.ndarray, values: np.ndarray,
                codes: np.ndarray, integer: bool) -> bool:
    """Draw one line per series value (untrusted points as ``x`` along the bottom); return whether any is marked."""
    from matplotlib.transforms import blended_transform_factory

    numeric_series = series is not None and view.ds[series].dtype.kind in "fiu"
    n_lines = 1 if series is None else view.ds.sizes[series]
    if numeric_series:
        assert series is not None
        colors = _series_colorbar(fig, ax, view, series)
    else:
        colors = [OKABE_ITO[(i + 5) % len(OKABE_ITO)] if n_lines == 1 else OKABE_ITO[i % len(OKABE_ITO)]
                  for i in range(n_lines)]
    markers = "osD^vP*"
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
    return any_bad


def _label_line_axes(ax: Axes, view: SweepSlice, x: str, output: str, xv: np.ndarray, values: np.ndarray,
                     integer: bool) -> None:
    """Scale, format and label the axis and the output by the units rule, with a light grid."""
    ax.set_xscale("log" if view.log[0] else "linear")
    shown_x = set_axis_format(ax.xaxis, str(view.ds[x].attrs.get("units", "")), xv, log=view.log[0],
                              integer=not view.log[0] and is_integer_valued(xv))
    shown_y = set_axis_format(ax.yaxis, str(view.ds[output].attrs.get("units", "")), values[np.isfinite(values)],
                              integer=integer)
    ax.set_xlabel(axis_label(x, dict(view.ds[x].attrs), shown_x))
    ax.set_ylabel(axis_label(output, dict(view.ds[output].attrs), shown_y))
    ax.grid(True, color="#E5E5E5", linewidth=0.6)
    ax.tick_params(direction="out", labelsize=9)


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
    edges = from_unit(cell_edges(to_unit(values[order], log)), log)
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
