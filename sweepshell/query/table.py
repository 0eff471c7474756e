"""Points of a store as a table: one row per point, grid points and the point list together.

Columns are the sweep axes, the scalar outputs, ``regime`` and ``status`` (as names, pandas
categoricals) and ``source`` (``grid`` or ``points``, the list of points evaluated off the
grid along regime boundaries). Only the columns a question needs are read.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from sweepshell.errors import QueryError
from sweepshell.models.base import TRUSTED_STATUSES, Status
from sweepshell.store import metadata
from sweepshell.store.chunk_checks import check_trusted_values
from sweepshell.store.metadata import ATTR

if TYPE_CHECKING:
    import pandas as pd
    import xarray as xr

__all__ = [
    "SOURCE_COLUMN",
    "SweepFields",
    "check_fields",
    "describe_fields",
    "describe_provenance",
    "load_table",
    "read_store_points",
    "regime_names",
    "select_points",
    "to_records",
]

SOURCE_COLUMN = "source"
SOURCES = ("grid", "points")
NO_REGIME = "none"


@dataclass(frozen=True)
class SweepFields:
    """What a store offers to questions.

    Attributes
    ----------
    axes
        Sweep axes in store order.
    scalar_outputs
        Outputs with one value per point.
    path_outputs
        Outputs with extra dimensions (e.g. a sampled load path).
    regimes
        The model's regime names (code order).
    categories
        Named columns → allowed names (regime, status, source, categorical axes).
    """

    axes: tuple[str, ...]
    scalar_outputs: tuple[str, ...]
    path_outputs: tuple[str, ...]
    regimes: tuple[str, ...]
    categories: dict[str, list[str]] = field(default_factory=dict)

    @property
    def columns(self) -> tuple[str, ...]:
        """Every name a where-expression may use."""
        return (*self.axes, *self.scalar_outputs, metadata.REGIME_VAR, metadata.STATUS_VAR, SOURCE_COLUMN)


def regime_names(ds: xr.Dataset) -> tuple[str, ...]:
    """Return the model's regime names of a store Dataset (code order, without ``none``)."""
    regimes = ds.attrs.get(ATTR.regimes)
    if isinstance(regimes, str):  # netCDF keeps a list of names as one space-separated string
        regimes = regimes.split()
    if regimes is not None and len(regimes):
        return tuple(str(r) for r in regimes)
    meanings = str(ds[metadata.REGIME_VAR].attrs.get("flag_meanings", "")).split()
    return tuple(meanings[1:])


def describe_fields(ds: xr.Dataset) -> SweepFields:
    """Return the axes, outputs, regimes and named values of a store Dataset."""
    axes = tuple(str(d) for d in ds[metadata.STATUS_VAR].dims)
    special = {metadata.STATUS_VAR, metadata.REGIME_VAR}
    scalar = tuple(str(n) for n, v in ds.data_vars.items() if n not in special and v.dims == axes)
    paths = tuple(str(n) for n, v in ds.data_vars.items() if n not in special and v.dims != axes)
    regimes = regime_names(ds)
    categories: dict[str, list[str]] = {
        metadata.REGIME_VAR: [NO_REGIME, *regimes],
        metadata.STATUS_VAR: [s.name for s in Status],
        SOURCE_COLUMN: list(SOURCES),
    }
    for a in axes:
        if ds[a].dtype.kind not in "fiu":
            categories[a] = [str(v) for v in ds[a].values]
    return SweepFields(axes=axes, scalar_outputs=scalar, path_outputs=paths, regimes=regimes,
                       categories=categories)


def read_store_points(ds: xr.Dataset) -> dict[str, np.ndarray] | None:
    """Return the store's point list (see :mod:`sweepshell.store.points`) or ``None``."""
    from sweepshell.store.points import read_points

    source = ds.encoding.get("source")
    if not source or not Path(source).exists():
        return None
    points = read_points(source)
    if points is None or points[metadata.STATUS_VAR].size == 0:
        return None
    return points


def check_fields(fields: Iterable[str], info: SweepFields, what: str = "--fields") -> list[str]:
    """Return the field names if every one is a column of the store; else raise QueryError."""
    names = [f.strip() for f in fields if f.strip()]
    allowed = set(info.columns)
    for name in names:
        if name in info.path_outputs:
            raise QueryError(f"{what}: {name!r} has extra dimensions (one array per point); plot it with "
                             f"`sweepshell path` or read it with xarray", field=what, value=name)
        if name not in allowed:
            raise QueryError(f"{what}: {name!r} is not a field of this store; use one of "
                             f"{', '.join(info.columns)}", field=what, value=name,
                             allowed=", ".join(info.columns))
    return names


def _categorical(codes: np.ndarray, names: Sequence[str]) -> pd.Categorical:
    import pandas as pd

    return pd.Categorical.from_codes(codes.astype(np.int64), categories=list(names))


def load_table(ds: xr.Dataset, columns: Iterable[str], *, trusted_only: bool = True,
               include_points: bool = True, points: Mapping[str, np.ndarray] | None = None) -> pd.DataFrame:
    """Return a DataFrame of the store's points with the requested columns (axes always included).

    Parameters
    ----------
    ds
        A store Dataset (from :func:`sweepshell.open_sweep`).
    columns
        Scalar outputs, ``regime``, ``status`` or ``source`` wanted besides the axes.
    trusted_only
        Keep only points whose status is ``ok`` or ``no_instability``.
    include_points
        Add the store's point list (points evaluated off the grid) after the grid points.
    points
        The point list to use instead of reading it from the store.
    """
    import pandas as pd

    info = describe_fields(ds)
    wanted = [c for c in dict.fromkeys(columns) if c not in info.axes]
    status = np.asarray(ds[metadata.STATUS_VAR].values).reshape(-1)
    trusted_codes = np.array(sorted(int(s) for s in TRUSTED_STATUSES))
    keep = np.isin(status, trusted_codes) if trusted_only else status != Status.pending
    index = np.flatnonzero(keep)
    shape = tuple(ds.sizes[a] for a in info.axes)
    grid_index = np.unravel_index(index, shape)
    data: dict[str, Any] = {}
    for i, a in enumerate(info.axes):
        data[a] = np.asarray(ds[a].values)[grid_index[i]]
    regime_offset = 1  # code -1 (none) is category 0
    for c in wanted:
        if c == metadata.STATUS_VAR:
            data[c] = status[index]
        elif c == SOURCE_COLUMN:
            data[c] = np.zeros(index.size, dtype=np.int64)
        else:
            data[c] = np.asarray(ds[c].values).reshape(-1)[index]
            # a trusted point never answers with a lost value (a missing chunk reads as NaN)
            check_trusted_values(data[c], status[index], c, ds.attrs, ds.encoding.get("source"))
    extra = (points if points is not None else read_store_points(ds)) if include_points else None
    if extra is not None:
        pstatus = np.asarray(extra[metadata.STATUS_VAR])
        pkeep = np.isin(pstatus, trusted_codes) if trusted_only else pstatus != Status.pending
        for a in info.axes:
            data[a] = np.concatenate([data[a], np.asarray(extra[a])[pkeep]])
        for c in wanted:
            add = np.ones(int(pkeep.sum()), dtype=np.int64) if c == SOURCE_COLUMN else np.asarray(extra[c])[pkeep]
            if c not in (SOURCE_COLUMN, metadata.STATUS_VAR, metadata.REGIME_VAR):
                check_trusted_values(add, pstatus[pkeep], c, ds.attrs, ds.encoding.get("source"))
            data[c] = np.concatenate([data[c], add])
    for c in wanted:
        if c == metadata.REGIME_VAR:
            data[c] = _categorical(np.asarray(data[c]).astype(np.int64) + regime_offset, [NO_REGIME, *info.regimes])
        elif c == metadata.STATUS_VAR:
            data[c] = _categorical(np.asarray(data[c]), [s.name for s in Status])
        elif c == SOURCE_COLUMN:
            data[c] = _categorical(np.asarray(data[c]), SOURCES)
    return pd.DataFrame(data, copy=False)


def select_points(ds: xr.Dataset, where: str | None = None, fields: Sequence[str] | None = None, *,
                  sort: str | None = None, limit: int | None = None, trusted_only: bool = True,
                  include_points: bool = True) -> pd.DataFrame:
    """Return the points matching ``where`` as a DataFrame of axes and fields.

    Parameters
    ----------
    ds
        A store Dataset.
    where
        A where-expression (see :data:`sweepshell.query.expression.GRAMMAR`); all points if ``None``.
    fields
        Columns besides the axes; default every scalar output and ``regime`` (and ``status``
        when untrusted points are included).
    sort
        A column to sort by; a leading ``-`` sorts in descending order.
    limit
        At most this many rows (after sorting).
    trusted_only
        Only points with status ``ok`` or ``no_instability``.
    include_points
        Include the point list evaluated off the grid.

    Raises
    ------
    QueryError
        For an unknown field, a bad expression or a bad limit.
    """
    from sweepshell.query.expression import check_expression, evaluate_where, names_in_expression

    info = describe_fields(ds)
    if fields is None:
        fields = [*info.scalar_outputs, metadata.REGIME_VAR] + ([] if trusted_only else [metadata.STATUS_VAR])
    fields = [f for f in check_fields(fields, info) if f not in info.axes] if fields else []
    needed = list(fields)
    expr = None
    if where is not None:
        expr = check_expression(where, info.columns, info.categories)
        needed += sorted(names_in_expression(expr))
    descending = False
    if sort:
        descending = sort.startswith("-")
        sort = sort.lstrip("-")
        check_fields([sort], info, "--sort")
        needed.append(sort)
    if limit is not None and limit < 0:
        raise QueryError(f"--limit={limit} must be ≥ 0", field="limit", value=limit)
    table = load_table(ds, needed, trusted_only=trusted_only, include_points=include_points)
    if expr is not None:
        table = table[evaluate_where(table, expr)]
    if sort:
        table = table.sort_values(sort, ascending=not descending, kind="stable", na_position="last")
    if limit is not None:
        table = table.iloc[:limit]
    return table[[*info.axes, *fields]].reset_index(drop=True)


def to_records(table: pd.DataFrame) -> list[dict[str, Any]]:
    """Return the rows as JSON-ready dicts (names as strings, NaN and infinities as ``None``)."""
    columns = {}
    for name in table.columns:
        col = table[name]
        if hasattr(col, "cat"):
            columns[name] = col.astype(str).tolist()
        else:
            values = np.asarray(col)
            if values.dtype.kind == "f":
                obj = values.astype(object)
                obj[~np.isfinite(values)] = None
                columns[name] = obj.tolist()
            elif values.dtype.kind in "iu":
                columns[name] = values.tolist()
            else:
                columns[name] = [str(v) for v in values]
    names = list(columns)
    return [dict(zip(names, row, strict=True)) for row in zip(*columns.values(), strict=True)]


def describe_provenance(ds: xr.Dataset) -> dict[str, Any]:
    """Return model, version, settings and fixed parameters recorded in a store Dataset."""
    def loads(key: str) -> Any:
        try:
            return metadata.read_record(ds.attrs, key, "{}")
        except ValueError:
            return {}

    return {"model": ds.attrs.get(ATTR.model), "model_version": ds.attrs.get(ATTR.model_version),
            "settings": loads(ATTR.settings), "fixed": loads(ATTR.fixed)}
