"""Export a store for tools outside the zarr world: netCDF, CSV, Parquet.

- **netcdf**: the whole Dataset (every variable, coordinate and attribute). Written with
  h5netcdf (netCDF4; the ``h5netcdf`` extra) when installed, else with scipy (netCDF3,
  64-bit offsets; scipy is a dependency); ``engine=`` chooses. netCDF3 has no unsigned
  bytes, so there ``status`` is stored as signed ``int8`` (codes 0..5 are unchanged).
  ``flag_values`` are written in their variable's dtype (as CF asks), string coordinates
  carry no ``units``; attributes that are lists of names are joined with spaces (the
  readers accept both forms, so queries on the exported file work); other non-scalar
  attributes become JSON strings.
- **csv** / **parquet**: one row per grid point in C order of the axes, with the axis values,
  every output without extra dimensions, the regime *name* (``none`` for -1) and the status
  *name*. NaN is an empty CSV field; floats are written in their shortest exact form, so
  they read back bit for bit. Parquet keeps each column's ``units`` and ``long_name`` in its
  field metadata; it needs pyarrow (the ``parquet`` extra): without it the export stops
  with a clear message before anything is written.

Off-grid point lists (the ``points`` sub-group) are not exported. Every file is written to
a temporary name beside the target and renamed into place, so a failed export leaves no
partial file.
"""

from __future__ import annotations

import contextlib
import csv
import importlib.util
import json
import logging
import math
import os
from collections.abc import Iterator
from pathlib import Path
from typing import IO, Any

import numpy as np

from sweepshell.errors import SweepshellError
from sweepshell.models.base import Status
from sweepshell.store import metadata
from sweepshell.store.catalog import read_axis_order
from sweepshell.store.metadata import ATTR
from sweepshell.store.reader import check_readable_store

__all__ = [
    "EXPORT_FORMATS",
    "NETCDF_ENGINES",
    "ExportError",
    "export_store",
    "iter_point_rows",
    "point_columns",
]

log = logging.getLogger(__name__)

#: format name → default file suffix
EXPORT_FORMATS = {"netcdf": ".nc", "csv": ".csv", "parquet": ".parquet"}
#: netCDF writers: h5netcdf (netCDF4, optional) and scipy (netCDF3)
NETCDF_ENGINES = ("h5netcdf", "scipy")


class ExportError(SweepshellError, ValueError):
    """An export cannot be made as asked (format, output path, missing optional library)."""


def _default_output(store: Path, fmt: str) -> Path:
    name = store.name.removesuffix(".zarr") if store.name.endswith(".zarr") else store.name
    return store.with_name(name + EXPORT_FORMATS[fmt])


def point_columns(store: str | os.PathLike[str]) -> tuple[list[str], list[str]]:
    """Return ``(axis names in dimension order, scalar output names)`` of a store's point table."""
    import zarr

    attrs = check_readable_store(store, chunks=True)
    axes = metadata.read_record(attrs, ATTR.axes)
    names = read_axis_order(store, axes)
    group = zarr.open_group(str(store), mode="r", zarr_format=3)
    scalars = []
    for name, arr in sorted(group.arrays()):
        dims = tuple(getattr(arr.metadata, "dimension_names", None) or ())
        if name in (metadata.STATUS_VAR, metadata.REGIME_VAR) or name in names:
            continue
        if dims == tuple(names) and arr.dtype.kind in "fiu":
            scalars.append(name)
    return names, scalars


def iter_point_rows(store: str | os.PathLike[str]) -> Iterator[dict[str, np.ndarray]]:
    """Yield the point table in slabs along the first axis: column name → 1-D array.

    Columns: the axes (float64, or object names), the scalar outputs, ``regime`` and
    ``status`` as object arrays of names.
    """
    import zarr

    attrs = check_readable_store(store, chunks=True)
    names, scalars = point_columns(store)
    axes = metadata.read_record(attrs, ATTR.axes)
    regimes = ["none", *(str(r) for r in attrs.get(ATTR.regimes, []))]
    status_names = np.array([s.name for s in Status], dtype=object)
    regime_names = np.array(regimes, dtype=object)
    group: Any = zarr.open_group(str(store), mode="r", zarr_format=3)
    shape = tuple(len(axes[n]) for n in names)
    rows_per_slab = max(1, int(attrs[ATTR.block_shape][0]))
    values = [np.array(axes[n], dtype=object) if axes[n] and isinstance(axes[n][0], str)
              else np.asarray(axes[n], dtype=np.float64) for n in names]
    for start in range(0, shape[0], rows_per_slab):
        stop = min(shape[0], start + rows_per_slab)
        grids = np.meshgrid(values[0][start:stop], *values[1:], indexing="ij")
        cols: dict[str, np.ndarray] = {n: g.reshape(-1) for n, g in zip(names, grids, strict=True)}
        for name in scalars:
            cols[name] = np.asarray(group[name][start:stop]).reshape(-1)
        regime = np.asarray(group[metadata.REGIME_VAR][start:stop]).reshape(-1).astype(np.int64)
        status = np.asarray(group[metadata.STATUS_VAR][start:stop]).reshape(-1).astype(np.int64)
        ok_regime = (regime >= -1) & (regime < len(regimes) - 1)
        ok_status = status < len(status_names)
        cols[metadata.REGIME_VAR] = np.where(ok_regime, regime_names[np.clip(regime + 1, 0, len(regimes) - 1)],
                                           regime.astype(str).astype(object))
        cols[metadata.STATUS_VAR] = np.where(ok_status, status_names[np.clip(status, 0, len(status_names) - 1)],
                                           status.astype(str).astype(object))
        yield cols


def _format_column(column: np.ndarray) -> list[str]:
    if column.dtype.kind == "f":
        return ["" if math.isnan(v) else repr(v) for v in column.tolist()]
    return [str(v) for v in column.tolist()]


def _write_csv(store: Path, handle: IO[str]) -> int:
    writer = csv.writer(handle, lineterminator="\n")
    header_written = False
    rows = 0
    for cols in iter_point_rows(store):
        if not header_written:
            writer.writerow(list(cols))
            header_written = True
        formatted = [_format_column(c) for c in cols.values()]
        writer.writerows(zip(*formatted, strict=True))
        rows += len(formatted[0]) if formatted else 0
    return rows


def _netcdf_attr(value: Any) -> Any:
    if isinstance(value, bool):
        return int(value)
    if isinstance(value, (list, tuple)) and value and all(isinstance(v, str) for v in value):
        return " ".join(value)
    if isinstance(value, (list, tuple)) and all(isinstance(v, (int, float)) and not isinstance(v, bool)
                                                for v in value):
        return list(value) if value else ""
    if isinstance(value, (dict, list, tuple)) or value is None:
        return json.dumps(value)
    return value


def _write_netcdf(store: Path, target: Path, engine: str) -> str:
    from sweepshell.store.reader import open_sweep

    ds = open_sweep(store)
    if engine == "scipy":
        # netCDF3 has no unsigned types; status codes are small, so int8 holds them exactly
        ds[metadata.STATUS_VAR] = ds[metadata.STATUS_VAR].astype(np.int8)
    for var in ds.variables.values():
        var.encoding = {}
        attrs = {k: _netcdf_attr(v) for k, v in var.attrs.items()}
        if "flag_values" in attrs and var.dtype.kind in "iu":  # CF: flag values in the variable's own type
            attrs["flag_values"] = np.asarray(var.attrs["flag_values"], dtype=var.dtype)
        if var.dtype.kind in "OUS":  # names carry no units
            attrs.pop("units", None)
        var.attrs = attrs
    ds.attrs = {k: _netcdf_attr(v) for k, v in ds.attrs.items()}
    if engine == "scipy":
        ds.to_netcdf(target, engine="scipy", format="NETCDF3_64BIT")
    else:
        ds.to_netcdf(target, engine="h5netcdf")
    return engine


def _write_parquet(store: Path, target: Path) -> None:
    import pandas as pd
    import pyarrow as pa
    import pyarrow.parquet as pq

    from sweepshell.store.reader import open_sweep

    frames = [pd.DataFrame(cols) for cols in iter_point_rows(store)]
    table = pd.concat(frames, ignore_index=True)
    for name in (metadata.REGIME_VAR, metadata.STATUS_VAR):
        table[name] = table[name].astype("category")
    ds = open_sweep(store)
    arrow = pa.Table.from_pandas(table, preserve_index=False)
    fields = []
    for field in arrow.schema:
        meta = {}
        if field.name in ds.variables:
            attrs = ds[field.name].attrs
            meta = {key: str(attrs[key]) for key in ("units", "long_name") if attrs.get(key)}
        fields.append(field.with_metadata({k.encode(): v.encode() for k, v in meta.items()}) if meta else field)
    arrow = arrow.cast(pa.schema(fields, metadata=arrow.schema.metadata))
    pq.write_table(arrow, target)


def export_store(store: str | os.PathLike[str], fmt: str, output: str | os.PathLike[str] | None = None, *,
                 overwrite: bool = False, stdout: IO[str] | None = None,
                 engine: str | None = None) -> Path | None:
    """Write a store as netCDF, CSV or Parquet.

    Parameters
    ----------
    store
        The store folder.
    fmt
        ``"netcdf"``, ``"csv"`` or ``"parquet"``.
    output
        The file to write; default: the store path with ``.nc``, ``.csv`` or ``.parquet``
        instead of ``.zarr``. ``"-"`` with ``stdout`` writes CSV to that stream.
    overwrite
        Replace an existing file.
    stdout
        Stream for ``output="-"`` (CSV only).
    engine
        netCDF writer, ``"h5netcdf"`` or ``"scipy"``; ``None``: h5netcdf when installed.

    Returns
    -------
    Path or None
        The file written, or ``None`` when the CSV went to ``stdout``.

    Raises
    ------
    ExportError
        Unknown format, existing output without ``overwrite``, ``-`` with a binary format, an
        output inside the store, or Parquet without pyarrow.
    StoreNotFoundError, StoreSchemaError
        If ``store`` is not a readable store.
    """
    if fmt not in EXPORT_FORMATS:
        raise ExportError(f"format={fmt!r} is not supported; use one of {', '.join(EXPORT_FORMATS)}",
                          field="format", value=fmt, allowed=", ".join(EXPORT_FORMATS))
    source = Path(store)
    check_readable_store(source, chunks=True)
    nc_engine = _choose_writer(fmt, engine)
    if output is not None and str(output) == "-":
        if fmt != "csv" or stdout is None:
            raise ExportError(f"-o - (standard output) works for csv only; give a file name for {fmt}",
                              field="output", value="-")
        rows = _write_csv(source, stdout)
        log.info("exported %d rows of %s to standard output", rows, source)
        return None
    target = Path(output) if output is not None else _default_output(source, fmt)
    _check_target(source, target, overwrite)
    target.parent.mkdir(parents=True, exist_ok=True)
    tmp = target.with_name(f".{target.name}.sweepshell-tmp-{os.getpid()}")
    try:
        if fmt == "csv":
            with open(tmp, "w", newline="", encoding="utf-8") as handle:
                _write_csv(source, handle)
        elif fmt == "netcdf":
            _write_netcdf(source, tmp, nc_engine)
        else:
            _write_parquet(source, tmp)
        os.replace(tmp, target)
    finally:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
    return target


def _choose_writer(fmt: str, engine: str | None) -> str:
    """Return the netCDF engine to use, after checking the packages the format and engine need are installed."""
    if engine is not None and (fmt != "netcdf" or engine not in NETCDF_ENGINES):
        raise ExportError(f"engine={engine!r} is not a netCDF engine; use one of {', '.join(NETCDF_ENGINES)} "
                          "with --format netcdf", field="engine", value=engine, allowed=", ".join(NETCDF_ENGINES))
    has_h5 = all(importlib.util.find_spec(m) is not None for m in ("h5netcdf", "h5py"))
    if engine == "h5netcdf" and not has_h5:
        raise ExportError("engine h5netcdf needs the h5netcdf and h5py packages, which are not installed; run "
                          "`pip install sweepshell[h5netcdf]` or use --engine scipy", field="engine", value=engine)
    if fmt == "parquet" and importlib.util.find_spec("pyarrow") is None:
        raise ExportError("parquet export needs the pyarrow package, which is not installed; run `pip install "
                          "pyarrow` or export with --format csv or --format netcdf", field="format", value=fmt)
    return engine or ("h5netcdf" if has_h5 else "scipy")


def _check_target(source: Path, target: Path, overwrite: bool) -> None:
    """Refuse an output inside the store, an existing one (unless ``overwrite``) and a folder."""
    if target.resolve().is_relative_to(source.resolve()):
        raise ExportError(f"output {str(target)!r} is inside the store; write the export elsewhere",
                          field="output", value=str(target))
    if (target.exists() or target.is_symlink()) and not overwrite:
        raise ExportError(f"output {str(target)!r} exists; give another -o path or --force to replace it",
                          field="output", value=str(target))
    if target.is_dir():
        raise ExportError(f"output {str(target)!r} is a folder; give a file name", field="output", value=str(target))
