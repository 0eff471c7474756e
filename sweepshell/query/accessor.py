"""The ``.sweep`` accessor on xarray Datasets: the query layer from Python.

After ``import sweepshell.query`` every Dataset opened from a store answers::

    ds = sweepshell.open_sweep("results/column.zarr")
    ds.sweep.query('stiffness_ratio > 5 and regime == "buckled"', fields=["critical_load"])
    ds.sweep.regime_names          # ('stable', 'buckled')
    ds.sweep.trusted               # boolean DataArray: status ok or no_instability
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np
import xarray as xr

from sweepshell.models.base import TRUSTED_STATUSES
from sweepshell.query.table import SweepFields, describe_fields, regime_names, select_points
from sweepshell.store import metadata

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["SweepAccessor"]


@xr.register_dataset_accessor("sweep")
class SweepAccessor:
    """Questions to a sweep store Dataset (``ds.sweep``)."""

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
