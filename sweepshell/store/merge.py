"""Merge two stores of one sweep definition that differ in their axis values.

``merge_stores(A, B, C)`` writes a new store C over the union of the axis values of A and B
(numeric axes sorted, categorical axes in A's order then B's new names). Each point of C
takes the final values of whichever source computed it; points computed in neither are
pending, so ``sweepshell run`` with C's sweep (recorded in its ``sweep_yaml`` attribute)
computes exactly those.

Rules
-----
- A and B must agree on model, model version, settings, fixed parameters (the exact
  attribute strings), axis names and order, output variables and extra dimensions.
- Two numeric axis values closer than ``1e-12`` relative are the same value (A's is kept):
  grids built by different means differ in the last bit (``0.7`` vs ``0.7000000000000001``).
- A point final in both sources is a conflict when the statuses, the regimes or any output
  differ beyond ``rtol`` (relative, NaN equals NaN). Conflicts stop the merge, naming the
  first few points, unless ``prefer`` picks a side.
- C is built like any store (template with the sources' encodings, chunks of A's block
  shape, zstd with checksums, consolidated metadata) in a temporary folder, filled block by
  block (outputs, then regime, then status) and renamed into place; on any error nothing is
  left at the output path.
- C's attributes are A's, with the union axes, a new creation time, a sweep YAML over the
  union and ``merged_from_json``: for each source its path, creation time, sweep name, axes
  and sweep YAML (and its own ``merged_from_json`` if it was a merge).
- Off-grid point lists (the ``points`` sub-group) are not carried over; the report says so.
"""

from __future__ import annotations

import datetime as _dt
import json
import logging
import os
import shutil
import warnings
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from sweepshell.about import __version__
from sweepshell.errors import StoreMismatchError, StoreSchemaError
from sweepshell.store import metadata
from sweepshell.store.catalog import read_axis_order
from sweepshell.store.integrity import check_store_path
from sweepshell.store.merge_fill import MergeConflictError, fill_merged
from sweepshell.store.metadata import ATTR
from sweepshell.store.reader import check_readable_store
from sweepshell.store.writer import clean_stale_temporaries

__all__ = ["MERGED_FROM_ATTR", "MergeConflictError", "MergeReport", "merge_stores", "union_axis_values"]

log = logging.getLogger(__name__)

#: attribute of a merged store listing its sources (JSON string)
MERGED_FROM_ATTR = "merged_from_json"
#: relative distance below which two numeric axis values are the same value
_SAME_VALUE_RTOL = 1e-12


@dataclass(frozen=True)
class MergeReport:
    """What a merge wrote.

    Attributes
    ----------
    output
        The new store.
    total
        Points in the merged grid.
    from_a, from_b
        Points whose values were taken from A / from B.
    agreeing
        Points final in both sources with equal values (counted in ``from_a``).
    conflicts
        Points final in both with different values, resolved by ``prefer``.
    pending
        Points computed in neither source.
    points_not_merged
        Sources whose off-grid point lists were left out.
    """

    output: str
    total: int
    from_a: int
    from_b: int
    agreeing: int
    conflicts: int
    pending: int
    points_not_merged: tuple[str, ...] = ()

    def to_line(self) -> str:
        """Return the one-line summary printed by ``sweepshell merge``."""
        text = (f"merged {self.total} points into {self.output}: {self.from_a} from A, {self.from_b} from B "
                f"({self.agreeing} in both and equal, {self.conflicts} conflicts resolved), {self.pending} pending")
        if self.pending:
            text += " (run the merged store's sweep to compute them)"
        if self.points_not_merged:
            text += f"; off-grid points of {', '.join(self.points_not_merged)} not carried over"
        return text


def union_axis_values(a: list[Any], b: list[Any]) -> tuple[list[Any], np.ndarray, np.ndarray]:
    """Return the union of two axes and, for each union value, its index in ``a`` and in ``b`` (-1: absent).

    Numeric axes are sorted; values closer than ``1e-12`` relative count as one (``a``'s is
    kept). Categorical axes keep ``a``'s order followed by ``b``'s new names.
    """
    categorical = any(isinstance(v, str) for v in (*a, *b))
    if categorical:
        if not all(isinstance(v, str) for v in (*a, *b)):
            raise StoreMismatchError("an axis mixes names and numbers between the stores; they are not one sweep",
                                     field="axes")
        union = list(a) + [v for v in b if v not in a]
        pos_a = np.array([a.index(v) if v in a else -1 for v in union], dtype=np.int64)
        pos_b = np.array([b.index(v) if v in b else -1 for v in union], dtype=np.int64)
        return union, pos_a, pos_b
    fa = np.asarray(a, dtype=np.float64)
    fb = np.asarray(b, dtype=np.float64)
    # map each b value onto an a value within round-off, else keep it as a new value
    b_as = fb.copy()
    for j, v in enumerate(fb):
        close = np.nonzero(np.abs(fa - v) <= _SAME_VALUE_RTOL * np.maximum(np.abs(fa), abs(v)))[0]
        if close.size:
            b_as[j] = fa[close[0]]
    union_arr = np.unique(np.concatenate([fa, b_as]))
    lookup_a = {float(v): i for i, v in enumerate(fa)}
    lookup_b = {float(v): j for j, v in enumerate(b_as)}
    union = [float(v) for v in union_arr]
    pos_a = np.array([lookup_a.get(v, -1) for v in union], dtype=np.int64)
    pos_b = np.array([lookup_b.get(v, -1) for v in union], dtype=np.int64)
    return union, pos_a, pos_b


def _check_same_definition(a: str, b: str, attrs_a: dict[str, Any], attrs_b: dict[str, Any]) -> None:
    for key, what in ((ATTR.model, "model"), (ATTR.model_version, "model version"),
                      (ATTR.settings, "settings"), (ATTR.fixed, "fixed parameters")):
        va, vb = attrs_a.get(key), attrs_b.get(key)
        if va != vb:
            raise StoreMismatchError(
                f"stores {a!r} and {b!r} have different {what} ({_difference(va, vb)}); only stores of one model, "
                "version, settings and fixed parameters can be merged", field=key, value=(va, vb))


def _difference(va: Any, vb: Any) -> str:
    try:
        da, db = metadata.load_record(va), metadata.load_record(vb)
    except (TypeError, ValueError):
        da, db = None, None
    if isinstance(da, dict) and isinstance(db, dict):
        for k in sorted(set(da) | set(db)):
            if da.get(k) != db.get(k):
                return f"{k}: A has {json.dumps(da.get(k))}, B has {json.dumps(db.get(k))}"
    return f"A has {va!r}, B has {vb!r}"


def _parse_axes(path: str, attrs: dict[str, Any]) -> tuple[list[str], dict[str, list[Any]]]:
    try:
        values = metadata.read_record(attrs, ATTR.axes)
        if not isinstance(values, dict) or not all(isinstance(v, list) for v in values.values()):
            raise ValueError
    except (KeyError, TypeError, ValueError):
        raise StoreSchemaError(f"store {path!r} has an unreadable {ATTR.axes} attribute; run `sweepshell verify "
                               f"{path}`", field="store", value=path) from None
    return read_axis_order(path, values), values


def _build_template(tmp: Path, ds_a: Any, names: list[str], union: dict[str, list[Any]], data_vars: list[str],
                    group_a: Any, block_shape: tuple[int, ...], attrs: dict[str, Any],
                    spacing: dict[str, str]) -> None:
    import dask.array as da
    import xarray as xr

    shape = tuple(len(union[n]) for n in names)
    coords: dict[str, Any] = {}
    for n in names:
        values = union[n]
        arr = np.array(values, dtype=object) if values and isinstance(values[0], str) else \
            np.asarray(values, dtype=np.float64)
        coord_attrs = {**ds_a[n].attrs, "spacing": spacing[n]}
        coords[n] = xr.Variable((n,), arr, coord_attrs)
    variables: dict[str, Any] = {}
    encoding: dict[str, dict[str, Any]] = {}
    for v in data_vars:
        src = group_a[v]
        dims = tuple(ds_a[v].dims)
        extra = tuple(int(s) for s in src.shape[len(names):])
        for d in dims[len(names):]:
            if d not in coords and d in ds_a.coords:
                coords[d] = xr.Variable((d,), np.asarray(ds_a[d].values), dict(ds_a[d].attrs))
        fill = src.fill_value
        chunks = block_shape + extra
        variables[v] = xr.Variable(dims, da.full(shape + extra, fill, dtype=src.dtype, chunks=chunks),
                                   dict(ds_a[v].attrs))
        encoding[v] = {"chunks": chunks, "fill_value": fill, "compressors": tuple(src.compressors)}
    ds = xr.Dataset(variables, coords=coords, attrs=attrs)
    with warnings.catch_warnings():
        # same choice as the run's template (store/writer.py): consolidated metadata, arrays never added later
        warnings.filterwarnings("ignore", message=".*[Cc]onsolidated metadata.*")
        ds.to_zarr(tmp, mode="w-", compute=False, zarr_format=3, consolidated=True, encoding=encoding)


def merge_stores(a: str | os.PathLike[str], b: str | os.PathLike[str], output: str | os.PathLike[str], *,
                 prefer: str | None = None, rtol: float = 1e-9) -> MergeReport:
    """Merge stores ``a`` and ``b`` into a new store ``output`` over the union of their axes.

    Parameters
    ----------
    a, b
        The source stores (read only).
    output
        The new store; must not exist.
    prefer
        ``"a"`` or ``"b"``: which side wins where both are final and differ; ``None`` makes
        such conflicts an error.
    rtol
        Relative tolerance (dimensionless) under which two final values are the same.

    Returns
    -------
    MergeReport

    Raises
    ------
    StoreNotFoundError, StoreSchemaError
        A source is missing, not a store, or has unreadable chunks.
    StoreMismatchError
        The sources differ in model, version, settings, fixed parameters, axis names or outputs,
        or ``output`` exists.
    MergeConflictError
        Points final in both with different values, and ``prefer`` is ``None``.
    """
    import xarray as xr
    import zarr

    a, b, out_path = str(a), str(b), Path(output)
    _check_request(output, out_path, prefer)
    attrs_a, attrs_b = check_readable_store(a, chunks=True), check_readable_store(b, chunks=True)
    _check_same_definition(a, b, attrs_a, attrs_b)
    names, union, pos_a, pos_b = _union_grid(a, b, attrs_a, attrs_b)
    group_a = zarr.open_group(a, mode="r", zarr_format=3)
    group_b = zarr.open_group(b, mode="r", zarr_format=3)
    ds_a = xr.open_zarr(a, consolidated=True, zarr_format=3)
    ds_b = xr.open_zarr(b, consolidated=True, zarr_format=3)
    data_vars = _check_same_variables(a, b, ds_a, ds_b, names)
    outputs = [v for v in data_vars if v not in (metadata.STATUS_VAR, metadata.REGIME_VAR)]
    block_shape = tuple(int(x) for x in attrs_a[ATTR.block_shape])
    if len(block_shape) != len(names):
        raise StoreSchemaError(f"store {a!r} has a block shape {block_shape} for {len(names)} axes",
                               field="store", value=a)
    attrs = _merged_attributes(out_path, (a, attrs_a), (b, attrs_b), names, union)
    spacing = {}
    for n in names:
        sa, sb = ds_a[n].attrs.get("spacing"), ds_b[n].attrs.get("spacing")
        spacing[n] = str(sa) if sa == sb and sa is not None else "list"

    def build(tmp: Path) -> dict[str, int]:
        _build_template(tmp, ds_a, names, union, data_vars, group_a, block_shape, attrs, spacing)
        return fill_merged(tmp, a, b, group_a, group_b, names, union, pos_a, pos_b, outputs, block_shape, prefer,
                           rtol)

    counts = _write_into_place(out_path, build)
    skipped = tuple(p for p in (a, b) if metadata.has_node(Path(p) / metadata.POINTS_GROUP))
    if skipped:
        log.warning("off-grid points of %s were not carried over into %s", ", ".join(skipped), out_path)
    return MergeReport(output=str(out_path), total=int(np.prod([len(union[n]) for n in names])),
                       points_not_merged=skipped, **counts)


def _check_request(output: str | os.PathLike[str], out_path: Path, prefer: str | None) -> None:
    """Refuse a URL or system output path, an unknown ``prefer`` and an existing output, before any reading."""
    check_store_path(str(output), "-o")
    if prefer not in (None, "a", "b"):
        raise StoreMismatchError(f"prefer={prefer!r}; use 'a' or 'b'", field="prefer", value=prefer)
    if out_path.exists() or out_path.is_symlink():
        raise StoreMismatchError(f"output {str(out_path)!r} exists; merge writes a new store, choose another -o path",
                                 field="output", value=str(out_path))


def _union_grid(a: str, b: str, attrs_a: dict[str, Any], attrs_b: dict[str, Any]) -> tuple[
        list[str], dict[str, list[Any]], list[np.ndarray], list[np.ndarray]]:
    """Return the axis names, the union axes and, per axis, each union value's index in A and in B (-1: absent)."""
    names_a, axes_a = _parse_axes(a, attrs_a)
    names_b, axes_b = _parse_axes(b, attrs_b)
    if names_a != names_b:
        raise StoreMismatchError(f"stores {a!r} and {b!r} have different axes ({', '.join(names_a)} vs "
                                 f"{', '.join(names_b)}); only stores over the same axes, in the same order, merge",
                                 field="axes", value=(names_a, names_b))
    union: dict[str, list[Any]] = {}
    pos_a: list[np.ndarray] = []
    pos_b: list[np.ndarray] = []
    for n in names_a:
        values, pa, pb = union_axis_values(axes_a[n], axes_b[n])
        union[n] = values
        pos_a.append(pa)
        pos_b.append(pb)
    return names_a, union, pos_a, pos_b


def _check_same_variables(a: str, b: str, ds_a: Any, ds_b: Any, names: list[str]) -> list[str]:
    """Return the data variables, after checking both stores hold the same ones over the same dimensions."""
    data_vars = sorted(str(v) for v in ds_a.data_vars)
    if sorted(str(v) for v in ds_b.data_vars) != data_vars:
        raise StoreMismatchError(f"stores {a!r} and {b!r} hold different variables; they are not one sweep",
                                 field="outputs")
    for v in data_vars:
        if tuple(ds_a[v].dims[:len(names)]) != tuple(names) or ds_a[v].dims != ds_b[v].dims \
                or ds_a[v].dtype != ds_b[v].dtype:
            raise StoreMismatchError(f"variable {v} has other dimensions or type in {a!r} and {b!r}",
                                     field=v)
        for d in ds_a[v].dims[len(names):]:
            if ds_a.sizes[d] != ds_b.sizes[d] or (d in ds_a.coords and not np.array_equal(
                    ds_a[d].values, ds_b[d].values)):
                raise StoreMismatchError(f"extra dimension {d} differs between {a!r} and {b!r} "
                                         f"({ds_a.sizes[d]} vs {ds_b.sizes[d]} values); they are not one sweep",
                                         field=d)
    return data_vars


def _merged_attributes(out_path: Path, source_a: tuple[str, dict[str, Any]], source_b: tuple[str, dict[str, Any]],
                       names: list[str], union: dict[str, list[Any]]) -> dict[str, Any]:
    """Return C's attributes: A's, with the union axes, a new time, a sweep over the union and the sources."""
    import yaml

    attrs_a = source_a[1]
    now = _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds")
    sources = []
    for path, attrs in (source_a, source_b):
        record: dict[str, Any] = {"path": os.path.abspath(path), "created": attrs.get(ATTR.created),
                                  "sweep_name": attrs.get(ATTR.sweep_name), "axes_json": attrs.get(ATTR.axes),
                                  "sweep_yaml": attrs.get(ATTR.sweep_yaml)}
        if MERGED_FROM_ATTR in attrs:
            record[MERGED_FROM_ATTR] = attrs[MERGED_FROM_ATTR]
        sources.append(record)
    sweep_name = out_path.name.removesuffix(".zarr") or str(attrs_a.get(ATTR.sweep_name))
    try:
        resolved = yaml.safe_load(str(attrs_a.get(ATTR.sweep_yaml) or "")) or {}
        if not isinstance(resolved, dict):
            resolved = {}
    except yaml.YAMLError:
        resolved = {}
    resolved.update({"name": sweep_name, "axes": {n: union[n] for n in names},
                     "store": {"path": str(out_path)}})
    if "model" not in resolved:
        resolved["model"] = attrs_a.get(ATTR.model)
    return {**attrs_a, ATTR.tool: __version__, ATTR.created: now, ATTR.sweep_name: sweep_name,
            ATTR.axes: json.dumps(union, sort_keys=True),
            ATTR.sweep_yaml: yaml.safe_dump(resolved, sort_keys=False),
            MERGED_FROM_ATTR: json.dumps(sources, sort_keys=True)}


def _write_into_place(out_path: Path, build: Callable[[Path], dict[str, int]]) -> dict[str, int]:
    """Build the store in a temporary folder beside ``out_path`` and rename it into place; nothing is left on error."""
    clean_stale_temporaries(out_path)  # a killed merge's half-built store
    tmp = out_path.with_name(out_path.name + metadata.TEMP_SUFFIX + f"-{os.getpid()}")
    out_path.parent.mkdir(parents=True, exist_ok=True)
    if tmp.exists():
        shutil.rmtree(tmp)
    try:
        counts = build(tmp)
        try:
            os.rename(tmp, out_path)
        except OSError:
            raise StoreMismatchError(f"output {str(out_path)!r} appeared while merging; choose another -o path",
                                     field="output", value=str(out_path)) from None
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    return counts
