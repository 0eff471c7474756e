"""The ``.sweep`` accessor of xarray Datasets: the store's questions plus its regime map.

``import sweepshell`` registers it under ``ds.sweep`` (see :mod:`sweepshell`); the questions
come from :class:`sweepshell.query.accessor.SweepQueries`.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING

from sweepshell.query.accessor import SweepQueries

if TYPE_CHECKING:
    from matplotlib.axes import Axes

__all__ = ["SweepAccessor"]


class SweepAccessor(SweepQueries):
    """``ds.sweep``: summary, ``query``, ``trusted``, ``boundary`` and ``map`` of a sweep store Dataset."""

    def map(self, x: str | None = None, y: str | None = None, *, ax: Axes | None = None, color: str | None = None,
            contour: str | None = None, at: Mapping[str, str] | None = None, show_points: bool = False) -> Axes:
        """Draw the regime map over axes ``x`` and ``y`` (the first two numeric axes by default); return the axes.

        Parameters
        ----------
        x, y
            Axes of the map; any other axis is fixed by ``at`` (nearest value) or at its first value.
        ax
            matplotlib axes to draw into; a new figure in the house style (with the caution
            footer) when ``None``.
        color, contour, at, show_points
            As for ``sweepshell map``: an output as colour field, an output as contour lines,
            ``name → value`` text fixing other axes, off-grid points marked.
        """
        from sweepshell.plot.regime_map import draw_regime_map

        x, y = self._default_axes(x, y)
        result = draw_regime_map(self._ds, x, y, color=color, contour=contour, at=at, show_points=show_points, ax=ax)
        if ax is not None:
            return ax
        drawn: Axes = result.figure.axes[0]
        return drawn
