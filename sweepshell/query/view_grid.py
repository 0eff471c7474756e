"""Read-only answers about one view of two numeric axes, for callers that refine it.

Everything a refinement needs to know about a view in one object: its axis values and their
unit coordinates (log10 for log axes, see :func:`~sweepshell.query.slicing.to_unit`), the
regime codes of its grid (−1 where untrusted) and the trusted regimes already known at
other positions (the store's point list). Nothing here runs a model or writes.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from sweepshell.errors import QueryError
from sweepshell.query.boundary import known_points, slice_codes
from sweepshell.query.slicing import SweepSlice, from_unit, to_unit

__all__ = ["ViewGrid", "read_view_grid"]


@dataclass(frozen=True)
class ViewGrid:
    """A view's grid and the regimes known on and off it.

    Attributes
    ----------
    fixed
        Values of the other sweep axes in this view.
    x_values, y_values
        Axis values of the grid.
    x_unit, y_unit
        The same in unit coordinates.
    log
        Whether each axis is logarithmic.
    codes
        ``(nx, ny)`` regime codes of the grid (−1: not trusted).
    known
        Trusted regime codes of point-list entries in this view, by (x, y) value.
    """

    fixed: dict[str, Any]
    x_values: np.ndarray
    y_values: np.ndarray
    x_unit: np.ndarray
    y_unit: np.ndarray
    log: tuple[bool, bool]
    codes: np.ndarray
    known: dict[tuple[float, float], int]

    def axis_values(self, axis: int, unit: np.ndarray) -> np.ndarray:
        """Return axis values (0: x, 1: y) of unit coordinates."""
        return from_unit(unit, self.log[axis])


def read_view_grid(view: SweepSlice, x_axis: str, y_axis: str,
                   points: Mapping[str, np.ndarray] | None) -> ViewGrid:
    """Return the grid of ``view`` on the numeric axes ``x_axis``, ``y_axis`` and what is known on it.

    Raises
    ------
    QueryError
        If an axis holds names instead of numbers.
    """
    for name in (x_axis, y_axis):
        if view.ds[name].dtype.kind not in "fiu":
            raise QueryError(f"axis {name!r} holds names; refinement needs numeric axes", field="axis", value=name)
    xv = np.asarray(view.ds[x_axis].values, float)
    yv = np.asarray(view.ds[y_axis].values, float)
    found = known_points(points, view.fixed_values, x_axis, y_axis)
    known = {} if found is None else {(float(a), float(b)): int(c) for a, b, c in
                                      zip(found["x"], found["y"], found["regime"], strict=True)}
    log = (bool(view.log[0]), bool(view.log[1]))
    return ViewGrid(fixed=dict(view.fixed_values), x_values=xv, y_values=yv, x_unit=to_unit(xv, log[0]),
                    y_unit=to_unit(yv, log[1]), log=log, codes=slice_codes(view.ds), known=known)
