"""The questions behind the ``.sweep`` accessor on xarray Datasets: the query layer from Python.

:class:`SweepQueries` answers from a store Dataset; :class:`sweepshell.plot.accessor.SweepAccessor`
adds the regime map. ``import sweepshell`` registers the accessor (as soon as xarray is imported),
so every Dataset opened from a store — with :func:`sweepshell.open_sweep`, plain
``xr.open_zarr`` or from an exported netCDF file — answers::

    ds = sweepshell.open_sweep("results/column.zarr")
    ds.sweep                       # a short text summary: model, axes, counts, regimes
    ds.sweep.query('stiffness_ratio > 5 and regime == "buckled"', fields=["critical_load"])
    ds.sweep.trusted               # boolean DataArray: status ok or no_instability
    ds.sweep.map(ax=ax)            # the regime map drawn into matplotlib axes
    ds.sweep.boundary()            # the boundary between two regimes, as a table of vertices
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING

import numpy as np
import xarray as xr

from sweepshell.errors import QueryError
from sweepshell.models.base import TRUSTED_STATUSES, Status
from sweepshell.query.table import SweepFields, describe_fields, regime_names, select_points
from sweepshell.store import metadata
from sweepshell.store.metadata import ATTR

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["SweepQueries"]


class SweepQueries:
    """Questions to a sweep store Dataset (the read-only part of ``ds.sweep``)."""

    def __init__(self, ds: xr.Dataset) -> None:
        self._ds = ds

    @property
    def fields(self) -> SweepFields:
        """Axes, outputs, regimes and named values of the store."""
        return describe_fields(self._ds)

    @property
    def regime_names(self) -> tuple[str, ...]:
        """The model's regime names in code order."""
        return regime_names(self._ds)

    @property
    def trusted(self) -> xr.DataArray:
        """Whether each grid point has a trustworthy status (``ok`` or ``no_instability``)."""
        codes = sorted(int(s) for s in TRUSTED_STATUSES)
        return self._ds[metadata.STATUS_VAR].isin(codes)

    def regime_label(self) -> xr.DataArray:
        """Return the regime of every grid point as names (``none`` where untrusted)."""
        names = np.array(["none", *self.regime_names], dtype=object)
        codes = self._ds[metadata.REGIME_VAR]
        return xr.apply_ufunc(lambda c: names[np.asarray(c).astype(np.intp) + 1], codes, dask="allowed")

    def query(self, where: str | None = None, fields: Sequence[str] | None = None, *, sort: str | None = None,
              limit: int | None = None, all_points: bool = False, include_points: bool = True) -> pd.DataFrame:
        """Return the points where ``where`` holds, as a DataFrame of axes and fields.

        See :func:`sweepshell.query.table.select_points`; ``all_points`` includes points whose
        status is not trustworthy (with their ``status``).
        """
        return select_points(self._ds, where, fields, sort=sort, limit=limit, trusted_only=not all_points,
                             include_points=include_points)

    def boundary(self, between: tuple[str, str] | None = None, *, x: str | None = None, y: str | None = None,
                 at: Mapping[str, str] | None = None) -> pd.DataFrame:
        """Return the boundary between two regimes on the view ``x``, ``y`` as a table of vertices.

        The vertices lie midway between neighbouring grid points (and stored off-grid points)
        of the two regimes; no model is evaluated (``sweepshell boundary --bisections`` narrows
        them further). Columns: ``line`` (polyline number), the two axes, ``bracket_axis``,
        ``bracket_low`` and ``bracket_high`` (the boundary lies between).

        Parameters
        ----------
        between
            Two regime names; by default the two regimes present in the view when there are
            exactly two.
        x, y, at
            The view, as for :meth:`map`.
        """
        import pandas as pd

        from sweepshell.query.boundary import find_boundary

        x, y = self._default_axes(x, y)
        if between is None:
            between = self._two_regimes()
        found, _ = find_boundary(self._ds, x, y, (between[0], between[1]), at=at, bisections=0)
        rows = []
        for i, line in enumerate(found.lines):
            for k in range(len(line.x)):
                rows.append({"line": i, x: float(line.x[k]), y: float(line.y[k]),
                             "bracket_axis": (x, y)[int(line.along[k])], "bracket_low": float(line.low[k]),
                             "bracket_high": float(line.high[k])})
        return pd.DataFrame(rows, columns=["line", x, y, "bracket_axis", "bracket_low", "bracket_high"])

    def summary(self) -> str:
        """Return a few lines saying what the store holds: model, axes, status counts, regimes."""
        ds = self._ds
        attrs = ds.attrs
        package = attrs.get(ATTR.model_package)
        origin = f" from {package} {attrs.get(ATTR.model_package_version)}" if package and package != "sweepshell" \
            else ""
        status = np.asarray(ds[metadata.STATUS_VAR].values)
        axes = " x ".join(f"{d}[{ds.sizes[d]}]" for d in ds[metadata.STATUS_VAR].dims)
        counts = np.bincount(status.reshape(-1).astype(np.int64), minlength=len(Status))
        by_status = ", ".join(f"{int(counts[s])} {s.name}" for s in Status if counts[s])
        codes = np.asarray(ds[metadata.REGIME_VAR].values).reshape(-1).astype(np.int64)
        names = self.regime_names
        by_regime = ", ".join(f"{int((codes == i).sum())} {n}" for i, n in enumerate(names) if (codes == i).any())
        lines = [f"sweep {attrs.get(ATTR.sweep_name, '?')}: model {attrs.get(ATTR.model, '?')} "
                 f"{attrs.get(ATTR.model_version, '?')}{origin}",
                 f"  {status.size} points over {axes}: {by_status or 'none'}",
                 f"  regimes: {by_regime or 'none yet'}"]
        outputs = self.fields.scalar_outputs
        if outputs:
            lines.append(f"  outputs: {', '.join(outputs)}")
        return "\n".join(lines)

    def __repr__(self) -> str:
        try:
            return self.summary()
        except (KeyError, ValueError, QueryError):
            return "<sweep accessor: this Dataset is not a sweepshell store>"

    def _default_axes(self, x: str | None, y: str | None) -> tuple[str, str]:
        info = self.fields
        numeric = [a for a in info.axes if self._ds[a].dtype.kind in "fiu" and self._ds.sizes[a] > 1]
        if x is None:
            x = next((a for a in numeric if a != y), None)
        if y is None:
            y = next((a for a in numeric if a != x), None)
        if x is None or y is None:
            raise QueryError(f"this store has fewer than two numeric axes with several values ({', '.join(info.axes)});"
                             " name x and y", field="axis")
        return x, y

    def _two_regimes(self) -> tuple[str, str]:
        codes = np.unique(np.asarray(self._ds[metadata.REGIME_VAR].values))
        present = [self.regime_names[int(c)] for c in codes if 0 <= c < len(self.regime_names)]
        if len(present) != 2:
            raise QueryError(f"between=None needs exactly two regimes in the store; it holds {', '.join(present)}; "
                             "name two of them", field="between", value=present)
        return present[0], present[1]
