"""Load paths and fields: outputs with extra dimensions, drawn for chosen points.

An output with one extra dimension (a sampled load path) is drawn as curves, several points
overlaid, with the critical point of each marked when the store holds it. An output with two
extra dimensions (a height field over a cell) is drawn as one image per point.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from sweepshell.errors import QueryError
from sweepshell.models.base import TRUSTED_STATUSES, Status
from sweepshell.plot.layout import finish_figure
from sweepshell.plot.style import OKABE_ITO, axis_label, describe_value, make_figure, study_subtitle, title_lines
from sweepshell.plot.units import is_integer_valued, set_axis_format
from sweepshell.plot.views import MapResult
from sweepshell.query.slicing import SweepSlice, slice_sweep
from sweepshell.query.table import describe_fields, regime_names
from sweepshell.store import metadata

if TYPE_CHECKING:
    import xarray as xr
    from matplotlib.axes import Axes

__all__ = ["draw_load_paths", "parse_point"]


def parse_point(text: str) -> dict[str, str]:
    """Parse ``name=value,name=value`` (one point of ``sweepshell path --at``)."""
    from sweepshell.query.slicing import parse_at

    return parse_at([part for part in text.split(",") if part.strip()] or [text])


def _split(spec: str) -> tuple[str, str | None]:
    name, _, component = spec.partition(":")
    return name, (component or None)


def _component_dim(ds: xr.Dataset, name: str, axes: Sequence[str]) -> str | None:
    """Return the extra dimension of ``name`` whose coordinate holds component names, if any."""
    for d in ds[name].dims:
        if d not in axes and d in ds.coords and ds[d].dtype.kind not in "fiu":
            return str(d)
    return None


def draw_load_paths(ds: xr.Dataset, points: Sequence[Mapping[str, str]], *, y: str | None = None,
                    x: str | None = None, caution: bool = True) -> MapResult:
    """Draw a path output (``y``) against another (``x``) or the sample index, at each point.

    Parameters
    ----------
    ds
        A store Dataset.
    points
        One mapping per curve: axis name → value text (nearest grid value; unnamed axes at their first value).
    y, x
        ``OUTPUT`` or ``OUTPUT:COMPONENT`` for outputs with a component dimension (e.g. a load path
        stored as ``load`` and ``deflection``). By default ``y`` is the first path output — its
        ``load`` component against its other component when it has one — and ``x`` the sample index.
        An output with two extra dimensions (a field) is drawn as images, one per point.
    caution
        Draw the caution footer (it is kept in the file's metadata either way).

    Raises
    ------
    QueryError
        If the store has no path output, an output or component is unknown, or the two are
        sampled along different dimensions.
    """
    info = describe_fields(ds)
    if not info.path_outputs:
        raise QueryError("this store has no output with an extra dimension (no load path to draw); use "
                         "`sweepshell map --y OUTPUT` for scalar outputs", field="y")
    y_name, y_comp = _split(y) if y else (info.path_outputs[0], None)
    x_name, x_comp = _split(x) if x else (None, None)
    for flag, name in (("--y", y_name), ("--x", x_name)):
        if name is not None and name not in info.path_outputs:
            raise QueryError(f"{flag} {name!r} is not a path output; use one of {', '.join(info.path_outputs)}",
                             field=flag, value=name, allowed=", ".join(info.path_outputs))
    if _field_dims(ds, y_name, info.axes) is not None and y_comp is None:
        if x_name is not None:
            raise QueryError(f"{y_name} is a field over two dimensions and is drawn as an image; leave out --x",
                             field="x", value=x_name)
        return draw_fields(ds, points, y_name, caution=caution)
    curves = _Curves.resolve(ds, info.axes, y_name, y_comp, x_name, x_comp)
    fig = make_figure(7.4, 5.0)
    ax = fig.add_axes((0.085, 0.22, 0.88, 0.62))
    view, notes, xs, ys, marked = _draw_paths(ax, ds, curves, points or [{}])
    _label_path_axes(ax, ds, curves, np.concatenate(xs), np.concatenate(ys))
    what = f"{y_name.replace('_', ' ')}: {_words(y_name, curves.y_comp)}" if curves.y_comp else _words(y_name, None)
    if curves.x_name:
        what += f" against {_words(curves.x_name, curves.x_comp)}"
    ax.set_title(title_lines(dict(ds.attrs), what, study_subtitle(ds)), fontsize=10, loc="left")
    if marked:
        from matplotlib.lines import Line2D

        handles, _ = ax.get_legend_handles_labels()
        handles.append(Line2D([], [], marker="*", markersize=10, color="#FFFFFF", markeredgecolor="#1A1A1A",
                              linestyle="none", label="critical point"))
        ax.legend(handles=handles, fontsize=8.5, frameon=True, framealpha=0.9, edgecolor="#CCCCCC", loc="best")
    else:
        ax.legend(fontsize=8.5, frameon=True, framealpha=0.9, edgecolor="#CCCCCC", loc="best")
    finish_figure(fig, caution=caution)
    return MapResult(fig, view, tuple(notes))


def _words(name: str, comp: str | None) -> str:
    return (comp or name).replace("_", " ")


@dataclass(frozen=True)
class _Curves:
    """The curves a load-path figure draws: ``y`` against ``x`` (the sample index when ``x_name`` is None)."""

    axes: tuple[str, ...]
    y_name: str
    y_comp: str | None
    x_name: str | None
    x_comp: str | None

    @classmethod
    def resolve(cls, ds: xr.Dataset, axes: Sequence[str], y_name: str, y_comp: str | None, x_name: str | None,
                x_comp: str | None) -> _Curves:
        """Fill in the default components (``load`` against the other one) and check each names one curve."""
        y_dim = _component_dim(ds, y_name, axes)
        if y_dim is not None:
            components = [str(c) for c in ds[y_dim].values]
            if y_comp is None:
                y_comp = "load" if "load" in components else components[0]
                if x_name is None and len(components) > 1:
                    x_name, x_comp = y_name, next(c for c in components if c != y_comp)
        specs = [(y_name, y_comp)] + ([(x_name, x_comp)] if x_name else [])
        for name, comp in specs:
            dim = _component_dim(ds, name, axes)
            known = [str(c) for c in ds[dim].values] if dim else []
            if (comp is None) != (dim is None) or (comp is not None and comp not in known):
                allowed = ", ".join(f"{name}:{c}" for c in known) if known else name
                raise QueryError(f"{name}{':' + comp if comp else ''} does not name one sampled curve; use {allowed}",
                                 field="y", value=name)
        return cls(tuple(axes), y_name, y_comp, x_name, x_comp)

    def values(self, ds: xr.Dataset, view_ds: xr.Dataset, name: str, comp: str | None) -> np.ndarray:
        """Return one sampled curve of one point (its component selected)."""
        values = view_ds[name]
        if comp is not None:
            dim = _component_dim(ds, name, self.axes)
            values = values.sel({dim: comp})
        return np.asarray(values.values, float).reshape(-1)


def _draw_paths(ax: Axes, ds: xr.Dataset, curves: _Curves, points: Sequence[Mapping[str, str]]) -> tuple[
        SweepSlice, list[str], list[np.ndarray], list[np.ndarray], bool]:
    """Draw the path of each trusted point, its critical point starred; return the last view, notes and curves."""
    trusted = sorted(int(s) for s in TRUSTED_STATUSES)
    regimes = ("none", *regime_names(ds))
    notes: list[str] = []
    marked = False
    view = None
    xs: list[np.ndarray] = []
    ys: list[np.ndarray] = []
    for k, at in enumerate(points):
        view = slice_sweep(ds, [], at)
        status = int(view.ds[metadata.STATUS_VAR].values)
        where = ", ".join(c.describe().split(" (")[0] for c in view.cuts) or "the only point"
        if status not in trusted:
            notes.append(f"no trusted path at {where} (status {Status(status).name})")
            continue
        yv = curves.values(ds, view.ds, curves.y_name, curves.y_comp)
        xv = curves.values(ds, view.ds, curves.x_name, curves.x_comp) if curves.x_name else \
            np.arange(yv.size, dtype=float)
        regime = regimes[int(view.ds[metadata.REGIME_VAR].values) + 1]
        label = ", ".join(describe_value(c.name, c.value, dict(ds[c.name].attrs)) for c in view.cuts
                          if ds.sizes[c.name] > 1)
        color = OKABE_ITO[(k + 5) % len(OKABE_ITO)]
        ax.plot(xv, yv, color=color, linewidth=1.6, marker="o", markersize=2.5,
                label=f"{label or where}  ({regime.replace('_', ' ')})")
        xs.append(xv)
        ys.append(yv)
        critical = _critical_point(view.ds, xv, yv, curves.y_comp,
                                   curves.x_name is not None and curves.x_comp is not None)
        if critical is not None:
            ax.plot(*critical, marker="*", markersize=13, color=color, markeredgecolor="#1A1A1A",
                    markeredgewidth=0.8, linestyle="none", zorder=5)
            marked = True
        notes.extend(f"point {k + 1}: {c.describe()}" for c in view.cuts)
    if not xs:
        raise QueryError("none of the chosen points has a trusted result; pick other points (see `sweepshell "
                         "query STORE --all`)", field="at")
    assert view is not None
    return view, notes, xs, ys, marked


def _label_path_axes(ax: Axes, ds: xr.Dataset, curves: _Curves, all_x: np.ndarray, all_y: np.ndarray) -> None:
    """Format and label both axes: an output by its units, a component by its name, else the sample index."""
    y_name, y_comp, x_name, x_comp = curves.y_name, curves.y_comp, curves.x_name, curves.x_comp
    y_units = str(ds[y_name].attrs.get("units", "")) if y_comp is None else ""
    shown_y = set_axis_format(ax.yaxis, y_units, all_y[np.isfinite(all_y)], integer=is_integer_valued(all_y))
    ax.set_ylabel(axis_label(y_name, dict(ds[y_name].attrs), shown_y) if y_comp is None else _words(y_name, y_comp))
    if x_name:
        x_units = str(ds[x_name].attrs.get("units", "")) if x_comp is None else ""
        shown_x = set_axis_format(ax.xaxis, x_units, all_x[np.isfinite(all_x)])
        ax.set_xlabel(axis_label(x_name, dict(ds[x_name].attrs), shown_x) if x_comp is None
                      else _words(x_name, x_comp))
    else:
        sample_dim = next(str(d) for d in ds[y_name].dims
                          if d not in curves.axes and d != _component_dim(ds, y_name, curves.axes))
        set_axis_format(ax.xaxis, "", all_x, integer=True)
        ax.set_xlabel(f"{sample_dim.replace('_', ' ')} (index)")
    ax.grid(True, color="#E5E5E5", linewidth=0.6)
    ax.tick_params(direction="out", labelsize=9)


def _critical_point(point: xr.Dataset, xv: np.ndarray, yv: np.ndarray, y_comp: str | None,
                    x_is_component: bool) -> tuple[float, float] | None:
    """Return where the stored critical state lies on a drawn load path, if the store says.

    The load component is matched to the ``critical_load`` output (same normalisation); the
    horizontal position is the stored ``critical_deflection`` when the path is drawn against
    its deflection, otherwise the first crossing of the critical load along the path.
    """
    if y_comp != "load" or "critical_load" not in point:
        return None
    load = float(point["critical_load"].values)
    if not np.isfinite(load):
        return None
    if x_is_component and "critical_deflection" in point:
        deflection = float(point["critical_deflection"].values)
        if np.isfinite(deflection):
            return deflection, load
    finite = np.isfinite(xv) & np.isfinite(yv)
    xv, yv = xv[finite], yv[finite]
    above = np.nonzero(np.abs(yv) >= abs(load) * (1 - 1e-9))[0]
    if not above.size:
        return None
    k = int(above[0])
    if k == 0:
        return float(xv[0]), load
    t = (abs(load) - abs(yv[k - 1])) / (abs(yv[k]) - abs(yv[k - 1]) or 1.0)
    return float(xv[k - 1] + t * (xv[k] - xv[k - 1])), load


def _field_dims(ds: xr.Dataset, name: str, axes: Sequence[str]) -> tuple[str, str] | None:
    """Return the two numeric extra dimensions of a field output (rows, columns), if it is one."""
    extra = [str(d) for d in ds[name].dims if d not in axes]
    if len(extra) == 2 and all(d not in ds.coords or ds[d].dtype.kind in "fiu" for d in extra):
        return extra[0], extra[1]
    return None


def draw_fields(ds: xr.Dataset, points: Sequence[Mapping[str, str]], name: str, *,
                caution: bool = True) -> MapResult:
    """Draw a field output (two extra dimensions, e.g. a height map of the cell) as images, one per point.

    All images share one colour scale (diverging, centred on zero when the field changes sign)
    and one colour bar, so amplitudes compare across points.
    """
    info = describe_fields(ds)
    dims = _field_dims(ds, name, info.axes)
    assert dims is not None
    points = list(points) or [{}]
    if len(points) > 6:
        raise QueryError(f"{len(points)} points asked; a field is drawn as one image per point, at most 6",
                         field="at")
    trusted = sorted(int(s) for s in TRUSTED_STATUSES)
    regimes = ("none", *regime_names(ds))
    images: list[tuple[np.ndarray, str]] = []
    notes: list[str] = []
    view = None
    for at in points:
        view = slice_sweep(ds, [], at)
        status = int(view.ds[metadata.STATUS_VAR].values)
        where = ", ".join(describe_value(c.name, c.value, dict(ds[c.name].attrs)) for c in view.cuts)
        notes.extend(f"fixed {c.describe()}" for c in view.cuts)
        if status not in trusted:
            notes.append(f"no trusted result at {where} (status {Status(status).name})")
            continue
        regime = regimes[int(view.ds[metadata.REGIME_VAR].values) + 1].replace("_", " ")
        images.append((np.asarray(view.ds[name].transpose(*dims).values, float), f"{where}\n{regime}"))
    if not images:
        raise QueryError("none of the chosen points has a trusted result; pick other points (see `sweepshell "
                         "query STORE --all`)", field="at")
    import matplotlib as mpl
    from matplotlib.colors import Normalize

    stack = np.concatenate([im.ravel() for im, _ in images])
    finite = stack[np.isfinite(stack)]
    low, high = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
    if low < 0 < high:
        bound = max(-low, high)
        low, high, cmap = -bound, bound, mpl.colormaps["RdBu_r"]
    else:
        cmap = mpl.colormaps["viridis"]
    n = len(images)
    fig = make_figure(7.4, 5.0 if n <= 3 else 7.2)
    cols = min(n, 3)
    rows = -(-n // cols)
    width = 0.78 / cols
    height = min(width * 7.4 / (5.0 if n <= 3 else 7.2), 0.62 / rows)
    mappable = None
    for k, (image, title) in enumerate(images):
        r, c = divmod(k, cols)
        ax = fig.add_axes((0.04 + c * width, 0.86 - (r + 1) * (height + 0.08) + 0.02, width * 0.86, height))
        mappable = ax.imshow(image, origin="lower", cmap=cmap, norm=Normalize(low, high), interpolation="nearest",
                             extent=(0, 1, 0, 1))
        ax.set_xticks([])
        ax.set_yticks([])
        ax.set_title(title, fontsize=8)
    assert mappable is not None
    cax = fig.add_axes((0.86, 0.22, 0.018, 0.56))
    cbar = fig.colorbar(mappable, cax=cax)
    attrs = dict(ds[name].attrs)
    shown = set_axis_format(cax.yaxis, str(attrs.get("units", "")), [low, high])
    cbar.set_label(axis_label(name, attrs, shown))
    fig.suptitle(title_lines(dict(ds.attrs), f"{name.replace('_', ' ')} over one cell ({dims[1]} across, "
                             f"{dims[0]} up)", study_subtitle(ds)), x=0.02, y=0.98, ha="left", va="top",
                 fontsize=9.5)
    finish_figure(fig, caution=caution)
    assert view is not None
    return MapResult(fig, view, tuple(notes))
