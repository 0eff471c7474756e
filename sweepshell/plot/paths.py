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
from sweepshell.store import layout

if TYPE_CHECKING:
    import xarray as xr

__all__ = ["draw_load_paths", "parse_point"]


def parse_point(text: str) -> dict[str, str]:
    """Parse ``name=value,name=value`` (one point of ``sweepshell path --at``)."""
    from sweepshell.query.slicing import parse_at

    return parse_at([part for part in text.split(",") if part.strip()] or [text])


def draw_load_paths(ds: xr.Dataset, points: Sequence[Mapping[str, str]], *, y: str | None = None,
                    x: str | None = None) -> MapResult:
    """Draw the path output ``y`` (against ``x``, another path output, or the sample index) at each point.

    Parameters
    ----------
    ds
        A store Dataset.
    points
        One mapping per curve: axis name → value text (nearest grid value; unnamed axes at their first value).
    y, x
        Outputs with an extra dimension; ``y`` defaults to the first such output, ``x`` to the sample index.

    Raises
    ------
    QueryError
        If the store has no path output, an output is unknown or the two have different extra dimensions.
    """
    info = describe_fields(ds)
    if not info.path_outputs:
        raise QueryError("this store has no output with an extra dimension (no load path to draw); use "
                         "`sweepshell map --y OUTPUT` for scalar outputs", field="y")
    y = y or info.path_outputs[0]
    for name in (y, x):
        if name is not None and name not in info.path_outputs:
            raise QueryError(f"{name!r} is not a path output; use one of {', '.join(info.path_outputs)}",
                             field="y", value=name, allowed=", ".join(info.path_outputs))
    extra = [d for d in ds[y].dims if d not in info.axes]
    if x is not None and [d for d in ds[x].dims if d not in info.axes] != extra:
        raise QueryError(f"{x!r} and {y!r} are sampled along different dimensions", field="x", value=x)
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
        status = int(view.ds[layout.STATUS_VAR].values)
        where = ", ".join(c.describe().split(" (")[0] for c in view.cuts) or "the only point"
        if status not in trusted:
            notes.append(f"no trusted path at {where} (status {Status(status).name})")
            continue
        yv = np.asarray(view.ds[y].values, float)
        xv = np.asarray(view.ds[x].values, float) if x is not None else np.arange(yv.size, dtype=float)
        regime = regimes[int(view.ds[layout.REGIME_VAR].values) + 1]
        label = ", ".join(f"{ds[c.name].attrs.get('symbol') or c.name} = {c.describe().split(' = ')[1].split(' (')[0]}"
                          for c in view.cuts)
        ax.plot(xv, yv, color=OKABE_ITO[(k + 5) % len(OKABE_ITO)], linewidth=1.6, marker="o", markersize=2.5,
                label=f"{label or where}  ({regime.replace('_', ' ')})")
        drawn += 1
        notes.extend(f"point {k + 1}: {c.describe()}" for c in view.cuts)
    if drawn == 0:
        raise QueryError("none of the chosen points has a trusted result; pick other points (see `sweepshell "
                         "query STORE --all`)", field="at")
    ax.set_xlabel(axis_label(x, dict(ds[x].attrs)) if x else f"{str(extra[0]).replace('_', ' ')} (index)")
    ax.set_ylabel(axis_label(y, dict(ds[y].attrs)))
    ax.grid(True, color="#E5E5E5", linewidth=0.6)
    ax.tick_params(direction="out", labelsize=9)
    ax.set_title(title_lines(dict(ds.attrs), f"{y.replace('_', ' ')} at chosen points"), fontsize=10, loc="left")
    ax.legend(fontsize=8.5, frameon=True, framealpha=0.9, edgecolor="#CCCCCC", loc="best")
    add_caution_footer(fig)
    assert view is not None
    return MapResult(fig, view, tuple(notes))
