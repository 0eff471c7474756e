"""What every map-like figure shares: the result record, cell edges of an axis, axis labels, the empty-view check.

Regime maps, output lines and load paths (:mod:`sweepshell.plot.regime_map`,
:mod:`sweepshell.plot.output_lines`, :mod:`sweepshell.plot.paths`) all return a
:class:`MapResult` and label their axes by the units rule of :mod:`sweepshell.plot.units`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from sweepshell.errors import QueryError
from sweepshell.plot.style import axis_label
from sweepshell.plot.units import is_integer_valued, set_axis_format
from sweepshell.query.slicing import SweepSlice

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

__all__ = ["MapResult", "cell_edges", "check_has_values", "label_axes"]


@dataclass(frozen=True)
class MapResult:
    """A drawn figure and what it shows (for the command line to report)."""

    figure: Figure
    view: SweepSlice
    notes: tuple[str, ...] = ()


def cell_edges(unit: np.ndarray) -> np.ndarray:
    """Return the edges of the cells centred on evenly spaced-unit grid values (one cell for one value)."""
    if len(unit) == 1:
        return np.array([unit[0] - 0.5, unit[0] + 0.5])
    mid = 0.5 * (unit[1:] + unit[:-1])
    return np.concatenate([[unit[0] - (mid[0] - unit[0])], mid, [unit[-1] + (unit[-1] - mid[-1])]])


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
