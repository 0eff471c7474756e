"""Extra points beside the grid: the point list written by refinement and boundary bisection.

The grid of a store is a Cartesian product of the axes. Points evaluated off the grid (new
points along regime boundaries) live in the sub-group ``points`` of the same store, as
one-dimensional arrays on a ``point`` dimension:

- one array per sweep axis (float64; a categorical axis is stored as ``int16`` codes into
  the grid's axis values, listed in the array's ``categories`` attribute),
- one array per model output, shaped ``(point, *extra dims)``,
- ``regime`` (int8) and ``status`` (uint8, the point list's own ledger, same codes as the
  grid's), ``level`` (int16: refinement level, 0 for bisection points) and ``origin``
  (int8, which procedure asked for the point).

The group attributes record model, model version and settings (checked equal to the grid's
before anything is written). Appending writes outputs first and ``status`` last, so points
whose status is still 0 (pending) after a killed append are ignored by readers. The point
list has a single writer at a time (``sweepshell refine`` / ``sweepshell boundary``).
After every append the consolidated metadata is rewritten, so ``xr.open_zarr(store)`` (the
grid) and ``xr.open_zarr(store, group="points")`` stay in step without warnings.
"""

from __future__ import annotations

import datetime as _dt
import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from sweepshell.models.base import Status
from sweepshell.store import metadata
from sweepshell.store.metadata import ATTR, POINTS_GROUP

__all__ = ["ORIGINS", "POINTS_DIM", "POINTS_GROUP", "append_points", "has_points", "read_count", "read_points"]

POINTS_DIM = "point"
LEVEL_VAR = "level"
ORIGIN_VAR = "origin"
#: procedures that add points, by code
ORIGINS = ("refine", "boundary")
_CHUNK = 4096


def _array(group: Any, name: str) -> Any:
    return group[name]


def has_points(path: str | os.PathLike[str]) -> bool:
    """Return whether the store has a point list (possibly empty)."""
    return metadata.has_node(Path(path) / POINTS_GROUP)


def read_points(path: str | os.PathLike[str], *, final_only: bool = True) -> dict[str, np.ndarray] | None:
    """Return the point list as name → numpy array, or ``None`` if the store has none.

    Categorical axes come back as object arrays of names. With ``final_only`` the points
    whose status is still pending (an interrupted append) are left out.
    """
    import zarr

    if not has_points(path):
        return None
    group = zarr.open_group(str(Path(path) / POINTS_GROUP), mode="r", zarr_format=3)
    status = np.asarray(_array(group, metadata.STATUS_VAR)[...])
    keep = status != Status.pending if final_only else np.ones(status.shape, dtype=bool)
    out: dict[str, np.ndarray] = {}
    for name, arr in group.arrays():
        values = np.asarray(arr[...])[: status.shape[0]]
        categories = arr.attrs.get("categories")
        if categories is not None:
            values = np.asarray(categories, dtype=object)[values.astype(np.intp)]
        out[name] = values[keep]
    return out


def _create_group(path: Path, grid_attrs: Mapping[str, Any], axes: Mapping[str, np.ndarray],
                  outputs: Mapping[str, tuple[tuple[int, ...], Mapping[str, Any]]]) -> Any:
    import zarr

    root = zarr.open_group(str(path), mode="r+", zarr_format=3)
    attrs = {
        "description": "points evaluated off the grid (along regime boundaries); same model as the grid",
        ATTR.model: grid_attrs.get(ATTR.model),
        ATTR.model_version: grid_attrs.get(ATTR.model_version),
        ATTR.settings: grid_attrs.get(ATTR.settings),
        ATTR.fixed: grid_attrs.get(ATTR.fixed),
        ATTR.created: _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds"),
    }
    group = root.create_group(POINTS_GROUP, attributes=attrs)
    dims = (POINTS_DIM,)
    axis_values: dict[str, list[Any]] = metadata.read_record(grid_attrs, ATTR.axes)
    for name in axes:
        values = axis_values[name]
        # the grid coordinate's description and units (a categorical axis has names, no units)
        described = {k: v for k, v in dict(root[name].attrs).items() if k in ("units", "long_name", "symbol")} \
            if name in root else {}
        if values and isinstance(values[0], str):
            described.pop("units", None)
            group.create_array(name, shape=(0,), chunks=(_CHUNK,), dtype="int16", fill_value=-1,
                               dimension_names=dims, attributes={"categories": list(values), **described})
        else:
            group.create_array(name, shape=(0,), chunks=(_CHUNK,), dtype="float64", fill_value=np.nan,
                               dimension_names=dims, attributes=described)
    for name, (extra_shape, out_attrs) in outputs.items():
        extra_dims = tuple(out_attrs.get("_dims", ()))
        group.create_array(name, shape=(0, *extra_shape), chunks=(_CHUNK, *extra_shape), dtype="float64",
                           fill_value=np.nan, dimension_names=dims + extra_dims,
                           attributes={k: v for k, v in out_attrs.items() if k != "_dims"})
    group.create_array(metadata.REGIME_VAR, shape=(0,), chunks=(_CHUNK,), dtype="int8", fill_value=-1,
                       dimension_names=dims, attributes=dict(grid_attrs.get("_regime_attrs", {})))
    group.create_array(metadata.STATUS_VAR, shape=(0,), chunks=(_CHUNK,), dtype="uint8", fill_value=0,
                       dimension_names=dims, attributes=dict(metadata.status_attrs()))  # type: ignore[arg-type]
    group.create_array(LEVEL_VAR, shape=(0,), chunks=(_CHUNK,), dtype="int16", fill_value=-1,
                       dimension_names=dims, attributes={"long_name": "refinement level (0: bisection)"})
    group.create_array(ORIGIN_VAR, shape=(0,), chunks=(_CHUNK,), dtype="int8", fill_value=-1,
                       dimension_names=dims, attributes={"long_name": "procedure that added the point",
                                                         "flag_values": list(range(len(ORIGINS))),
                                                         "flag_meanings": " ".join(ORIGINS)})
    return group


def append_points(path: str | os.PathLike[str], axes: Mapping[str, np.ndarray], outputs: Mapping[str, np.ndarray],
                  regime: np.ndarray, status: np.ndarray, *, origin: str, level: int | np.ndarray = 0,
                  output_attrs: Mapping[str, Mapping[str, Any]] | None = None,
                  output_dims: Mapping[str, Sequence[str]] | None = None) -> int:
    """Append evaluated points to the store's point list; return the new number of points.

    Parameters
    ----------
    path
        The store.
    axes
        Axis name → values of the new points (every sweep axis; names for categorical axes).
    outputs
        Output name → array ``(n, *extra)``.
    regime, status
        Per point, as returned by the model.
    origin
        One of :data:`ORIGINS`.
    level
        Refinement level per point (or one for all).
    output_attrs, output_dims
        Units/long_name and extra dimension names of each output, used when the group is created.
    """
    import zarr

    p = Path(path)
    grid_attrs = metadata.read_attrs(p)
    n = int(np.asarray(status).shape[0])
    if n == 0:
        return int(read_count(p))
    if origin not in ORIGINS:
        raise ValueError(f"origin={origin!r}; use one of {ORIGINS}")
    if has_points(p):
        group = zarr.open_group(str(p / POINTS_GROUP), mode="r+", zarr_format=3)
        stored = dict(group.attrs)
        for key in (ATTR.model, ATTR.model_version, ATTR.settings, ATTR.fixed):
            if stored.get(key) != grid_attrs.get(key):
                raise ValueError(f"point list of {p} was made with other {key}; refusing to mix")
    else:
        regime_attrs = metadata.regime_attrs(tuple(grid_attrs.get(ATTR.regimes, ())))
        spec = {name: (tuple(np.asarray(v).shape[1:]),
                       {**dict((output_attrs or {}).get(name, {})), "_dims": list((output_dims or {}).get(name, ()))})
                for name, v in outputs.items()}
        group = _create_group(p, {**grid_attrs, "_regime_attrs": regime_attrs}, axes, spec)
    start = int(_array(group, metadata.STATUS_VAR).shape[0])
    stop = start + n
    names = [*axes, *outputs, metadata.REGIME_VAR, LEVEL_VAR, ORIGIN_VAR, metadata.STATUS_VAR]
    for name in names:
        arr: Any = group[name]
        arr.resize((stop, *arr.shape[1:]))
    # outputs before status: a killed append leaves pending points that readers skip
    for name, values in axes.items():
        arr = group[name]
        categories = arr.attrs.get("categories")
        if categories is not None:
            lookup = {c: i for i, c in enumerate(categories)}
            values = np.array([lookup[str(v)] for v in np.asarray(values)], dtype=np.int16)
        arr[start:stop] = np.asarray(values)
    for name, values in outputs.items():
        _array(group, name)[start:stop] = np.asarray(values, dtype=np.float64)
    _array(group, metadata.REGIME_VAR)[start:stop] = np.asarray(regime, dtype=np.int8)
    _array(group, LEVEL_VAR)[start:stop] = np.broadcast_to(np.asarray(level, dtype=np.int16), (n,))
    _array(group, ORIGIN_VAR)[start:stop] = np.full(n, ORIGINS.index(origin), dtype=np.int8)
    _array(group, metadata.STATUS_VAR)[start:stop] = np.asarray(status, dtype=np.uint8)
    metadata.reconsolidate(p)
    return stop


def read_count(path: str | os.PathLike[str]) -> int:
    """Return the number of entries in the point list (0 if there is none)."""
    import zarr

    if not has_points(path):
        return 0
    group = zarr.open_group(str(Path(path) / POINTS_GROUP), mode="r", zarr_format=3)
    return int(_array(group, metadata.STATUS_VAR).shape[0])
