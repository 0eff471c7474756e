"""Load paths: outputs sampled along an extra dimension, drawn for chosen points, several overlaid."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING

import numpy as np

from sweepshell.errors import QueryError
from sweepshell.models.base import TRUSTED_STATUSES, Status
from sweepshell.plot.regime_map import MapResult
from sweepshell.plot.style import OKABE_ITO, add_caution_footer, axis_label, make_figure, title_lines
from sweepshell.query.slicing import slice_sweep
from sweepshell.query.table import describe_fields, regime_names
from sweepshell.store import metadata

if TYPE_CHECKING:
    import xarray as xr

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
                    x: str | None = None) -> MapResult:
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
    y_dim = _component_dim(ds, y_name, info.axes)
    if y_dim is not None:
        components = [str(c) for c in ds[y_dim].values]
        if y_comp is None:
            y_comp = "load" if "load" in components else components[0]
            if x_name is None and len(components) > 1:
                x_name, x_comp = y_name, next(c for c in components if c != y_comp)
    specs = [(y_name, y_comp)] + ([(x_name, x_comp)] if x_name else [])
    for name, comp in specs:
        dim = _component_dim(ds, name, info.axes)
        known = [str(c) for c in ds[dim].values] if dim else []
        if (comp is None) != (dim is None) or (comp is not None and comp not in known):
            allowed = ", ".join(f"{name}:{c}" for c in known) if known else name
            raise QueryError(f"{name}{':' + comp if comp else ''} does not name one sampled curve; use {allowed}",
                             field="y", value=name, allowed=allowed)

    def curve(view_ds: xr.Dataset, name: str, comp: str | None) -> np.ndarray:
        values = view_ds[name]
        if comp is not None:
            dim = _component_dim(ds, name, info.axes)
            values = values.sel({dim: comp})
        return np.asarray(values.values, float).reshape(-1)

    def label_of(name: str, comp: str | None) -> str:
        if comp is None:
            return axis_label(name, dict(ds[name].attrs))
        return f"{comp.replace('_', ' ')}  ({name.replace('_', ' ')})"

    if not points:
        points = [{}]
    fig = make_figure(7.4, 5.0)
    ax = fig.add_axes((0.085, 0.22, 0.88, 0.66))
    trusted = sorted(int(s) for s in TRUSTED_STATUSES)
    regimes = ("none", *regime_names(ds))
    notes: list[str] = []
    drawn = 0
    view = None
    for k, at in enumerate(points):
        view = slice_sweep(ds, [], at)
        status = int(view.ds[metadata.STATUS_VAR].values)
        where = ", ".join(c.describe().split(" (")[0] for c in view.cuts) or "the only point"
        if status not in trusted:
            notes.append(f"no trusted path at {where} (status {Status(status).name})")
            continue
        yv = curve(view.ds, y_name, y_comp)
        xv = curve(view.ds, x_name, x_comp) if x_name else np.arange(yv.size, dtype=float)
        regime = regimes[int(view.ds[metadata.REGIME_VAR].values) + 1]
        label = ", ".join(f"{ds[c.name].attrs.get('symbol') or c.name} = {c.describe().split(' = ')[1].split(' (')[0]}"
                          for c in view.cuts)
        ax.plot(xv, yv, color=OKABE_ITO[(k + 5) % len(OKABE_ITO)], linewidth=1.6, marker="o", markersize=2.5,
                label=f"{label or where}  ({regime.replace('_', ' ')})")
        drawn += 1
        notes.extend(f"point {k + 1}: {c.describe()}" for c in view.cuts)
    if drawn == 0:
        raise QueryError("none of the chosen points has a trusted result; pick other points (see `sweepshell "
                         "query STORE --all`)", field="at")
    sample_dim = next(str(d) for d in ds[y_name].dims if d not in info.axes and d != _component_dim(ds, y_name,
                                                                                                   info.axes))
    ax.set_xlabel(label_of(x_name, x_comp) if x_name else f"{sample_dim.replace('_', ' ')} (index)")
    ax.set_ylabel(label_of(y_name, y_comp))
    ax.grid(True, color="#E5E5E5", linewidth=0.6)
    ax.tick_params(direction="out", labelsize=9)
    what = y_comp or y_name
    ax.set_title(title_lines(dict(ds.attrs), f"{what.replace('_', ' ')} along the path at chosen points"),
                 fontsize=10, loc="left")
    ax.legend(fontsize=8.5, frameon=True, framealpha=0.9, edgecolor="#CCCCCC", loc="best")
    add_caution_footer(fig)
    assert view is not None
    return MapResult(fig, view, tuple(notes))
