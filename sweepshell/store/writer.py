"""Create a store from a plan, check an existing one against a plan, write blocks.

Safety rules this module keeps (see DESIGN.md and STACK-NOTES.md):

- The template (metadata, coordinates, attributes) is built in a temporary folder and moved
  into place atomically (:mod:`sweepshell.store.publish`: a rename on local disks; on object
  stores an upload whose root ``zarr.json`` comes last), so a run killed during creation leaves
  no half store that a reader could open or that blocks the next run.
- Every write covers whole chunks: a block is exactly one chunk of every variable.
- A block's outputs are written first, its regime next and its ``status`` last; a block
  whose status is not final is recomputed on resume. Writes are idempotent.
- Attributes are written once, at creation, never updated concurrently.
"""

from __future__ import annotations

import base64
import datetime as _dt
import json
import logging
import os
from collections.abc import Sequence
from typing import Any

import numpy as np

from sweepshell.about import CAUTION, __version__
from sweepshell.errors import StoreMismatchError, StoreSchemaError
from sweepshell.models import get_model_origin
from sweepshell.models.base import BatchResult, SweepModel
from sweepshell.plan import Block, SweepPlan
from sweepshell.store import metadata
from sweepshell.store.location import AnyPath, ObjectPath, as_path, zarr_store
from sweepshell.store.metadata import ATTR, canonical_json, is_store
from sweepshell.store.publish import clean_stale_temporaries, publish_template, temporary_folder

__all__ = [
    "check_store_matches",
    "clean_stale_temporaries",
    "create_store",
    "plan_attrs",
    "store_block_shape",
    "store_exists",
    "write_block",
    "write_template",
]

log = logging.getLogger(__name__)


def plan_attrs(plan: SweepPlan, model: SweepModel, block_shape: Sequence[int]) -> dict[str, Any]:
    """Return the provenance attributes of a store made from ``plan``."""
    origin = get_model_origin(plan.model)
    return {
        ATTR.tool: __version__,
        ATTR.schema: metadata.SCHEMA_VERSION,
        ATTR.model: plan.model,
        ATTR.model_version: plan.model_version,
        ATTR.model_package: origin.distribution,
        ATTR.model_package_version: origin.version,
        ATTR.settings: canonical_json(model.settings),
        ATTR.fixed: canonical_json(plan.fixed),
        ATTR.axes: canonical_json({a.name: list(a.values) for a in plan.axes}),
        ATTR.sweep_name: plan.name,
        ATTR.sweep_yaml: plan.resolved_yaml,
        ATTR.created: _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds"),
        ATTR.caution: CAUTION,
        ATTR.block_shape: [int(b) for b in block_shape],
        ATTR.regimes: list(model.regimes),
        ATTR.conventions: "CF-1.10",
    }



def check_store_matches(path: AnyPath, plan: SweepPlan, model: SweepModel) -> None:
    """Raise unless the existing store at ``path`` was made by the same sweep definition.

    Raises
    ------
    StoreSchemaError
        If ``path`` exists but is not a sweepshell store of a known schema.
    StoreMismatchError
        If model, model version, settings, fixed parameters or axes differ; the message
        names the first difference and suggests a new store path.
    """
    p = as_path(path)
    if not is_store(p):
        what = "a file" if p.is_file() else "a folder that is not a sweepshell store"
        raise StoreSchemaError(f"store.path={str(p)!r} is {what}; choose another path "
                               f"(e.g. store.path={p.with_name(p.stem + '-2.zarr')})",
                               field="store.path", value=str(p))
    attrs = metadata.read_attrs(p)
    if attrs.get(ATTR.schema) != metadata.SCHEMA_VERSION:
        raise StoreSchemaError(f"store {str(p)!r} has schema version {attrs.get(ATTR.schema)!r}; this sweepshell "
                               f"reads version {metadata.SCHEMA_VERSION}; use a matching sweepshell or a new path",
                               field="store.path", value=str(p))
    new = f"store.path={p.with_name(p.stem + '-2.zarr')}"
    checks = [
        ("model", attrs.get(ATTR.model), plan.model),
        ("model version", attrs.get(ATTR.model_version), plan.model_version),
        ("settings", attrs.get(ATTR.settings), canonical_json(model.settings)),
        ("fixed parameters", attrs.get(ATTR.fixed), canonical_json(plan.fixed)),
        ("axes", attrs.get(ATTR.axes), canonical_json({a.name: list(a.values) for a in plan.axes})),
    ]
    for what, stored, wanted in checks:
        if stored != wanted and not (what == "axes" and _same_axes(stored, wanted)):
            detail = _describe_difference(what, stored, wanted)
            raise StoreMismatchError(
                f"store {str(p)!r} was made with other {what} ({detail}); run into a new store with {new} "
                "(stores can be merged later)", field="store.path", value=str(p))


def _same_axes(stored: Any, wanted: Any) -> bool:
    """Whether two axis records differ only in the last bits of their numbers.

    Axis forms snap exact decimals (0 instead of −2.8·10⁻¹⁷); stores written before that keep
    their values and still resume with the same sweep.
    """
    try:
        a, b = metadata.load_record(stored), metadata.load_record(wanted)
    except (TypeError, ValueError):
        return False
    if list(a) != list(b):
        return False
    for name in a:
        va, vb = a[name], b[name]
        if len(va) != len(vb):
            return False
        for x, y in zip(va, vb, strict=True):
            if isinstance(x, str) or isinstance(y, str):
                if x != y:
                    return False
            else:
                scale = max((abs(v) for v in va if not isinstance(v, str)), default=0.0)
                if abs(float(x) - float(y)) > 16 * 2.220446049250313e-16 * scale:
                    return False
    return True


def _describe_difference(what: str, stored: Any, wanted: Any) -> str:
    if what in ("model", "model version"):
        return f"store has {stored!r}, this sweep {wanted!r}"
    try:
        a, b = metadata.load_record(stored), metadata.load_record(wanted)
    except (TypeError, ValueError):
        return "unreadable record in the store"
    keys = sorted(set(a) | set(b))
    for k in keys:
        if a.get(k) != b.get(k):
            sa, sb = _short(a.get(k)), _short(b.get(k))
            return f"{k}: store has {sa}, this sweep {sb}"
    return "ordering differs"


def _short(v: Any) -> str:
    text = json.dumps(v)
    return text if len(text) < 60 else text[:57] + "..."


def store_block_shape(path: AnyPath) -> tuple[int, ...]:
    """Return the block (= chunk) shape recorded in an existing store."""
    return tuple(int(b) for b in metadata.read_attrs(path)[ATTR.block_shape])


def store_exists(path: AnyPath) -> bool:
    """Return whether something is at ``path`` (a folder; on an object store, a store's root document)."""
    loc = as_path(path)
    if isinstance(loc, ObjectPath):  # a prefix without its root is a creation in progress or a leftover
        return metadata.has_node(loc)
    return loc.exists()


def create_store(plan: SweepPlan, model: SweepModel, block_shape: Sequence[int]) -> None:
    """Write the template of a new store (no values) and move it into place atomically."""
    target = as_path(plan.store_path)
    tmp = temporary_folder(target)
    write_template(tmp, plan, model, tuple(int(b) for b in block_shape))
    if not publish_template(tmp, target):
        # another runner created the store first; theirs is as good as ours if it matches
        check_store_matches(target, plan, model)


def write_template(folder: str | os.PathLike[str], plan: SweepPlan, model: SweepModel,
                   block_shape: tuple[int, ...]) -> None:
    """Write a store's template at ``folder`` with zarr alone: arrays, coordinates, attributes, no values.

    The nodes are what ``xarray.Dataset.to_zarr(..., compute=False)`` writes for the same dataset
    (coordinates with zarr's default compressor and xarray's ``_FillValue`` attribute on floats, outputs,
    ``regime`` and ``status`` chunked by block with a checksummed compressor), so ``xr.open_zarr`` opens
    it as before, without the cost of importing xarray and dask to create it. Consolidated metadata is
    written last.
    """
    import zarr
    from zarr.codecs import ZstdCodec

    root: Any = zarr.open_group(str(folder), mode="w-", zarr_format=3,
                                attributes=plan_attrs(plan, model, block_shape))
    for axis in plan.axes:
        param = model.get_parameter(axis.name)
        attrs: dict[str, Any] = {"long_name": param.doc, "spacing": axis.spacing}
        if not param.is_categorical:  # names carry no units
            attrs["units"] = param.units
        if param.symbol:
            attrs["symbol"] = param.symbol
        _write_coordinate(root, axis.name, axis.to_array(), attrs)
    for dim, coord in model.extra_coords().items():
        _write_coordinate(root, dim, np.asarray(coord), {})
    checked = (ZstdCodec(level=3, checksum=True),)
    extra = model.extra_dims
    for out in model.outputs:
        attrs = {"units": out.units, "long_name": out.doc}
        if out.symbol:
            attrs["symbol"] = out.symbol
        attrs.update(_cf_fill_attrs(np.dtype(out.dtype), np.nan))
        root.create_array(out.name, shape=plan.shape + tuple(extra[d] for d in out.dims), dtype=out.dtype,
                          chunks=block_shape + tuple(extra[d] for d in out.dims), fill_value=np.nan,
                          compressors=checked, attributes=attrs, dimension_names=plan.axis_names + out.dims)
    root.create_array(metadata.REGIME_VAR, shape=plan.shape, dtype=np.int8, chunks=block_shape, fill_value=-1,
                      compressors=checked, attributes=metadata.regime_attrs(model.regimes),
                      dimension_names=plan.axis_names)
    root.create_array(metadata.STATUS_VAR, shape=plan.shape, dtype=np.uint8, chunks=block_shape, fill_value=0,
                      compressors=checked, attributes=metadata.status_attrs(), dimension_names=plan.axis_names)
    metadata.reconsolidate(folder)


def _write_coordinate(root: Any, name: str, values: np.ndarray, attrs: dict[str, Any]) -> None:
    """Write one coordinate array (one chunk) with its values, as xarray writes an index coordinate."""
    if values.dtype.kind in "UO":  # variable-length strings: fixed-width ones are an unstable zarr 3 extension
        arr = root.create_array(name, shape=values.shape, dtype=str, chunks=values.shape, attributes=attrs,
                                dimension_names=(name,))
        arr[...] = values.astype(object)
        return
    attrs = {**attrs, **_cf_fill_attrs(values.dtype)}
    fill = np.nan if values.dtype.kind == "f" else 0
    arr = root.create_array(name, shape=values.shape, dtype=values.dtype, chunks=values.shape, fill_value=fill,
                            attributes=attrs, dimension_names=(name,))
    arr[...] = values


def _cf_fill_attrs(dtype: np.dtype[Any], fill: float = np.nan) -> dict[str, Any]:
    """Return the ``_FillValue`` attribute xarray writes beside a zarr 3 array of ``dtype`` (floats only).

    xarray records a float variable's missing value as the base64 text of its little-endian bytes;
    integer and string variables carry none (their fill value lives in the array metadata only).
    """
    if dtype.kind != "f":
        return {}
    raw = np.array(fill, dtype=dtype.newbyteorder("<")).tobytes()
    return {"_FillValue": base64.standard_b64encode(raw).decode("ascii")}


def write_block(path: AnyPath, block: Block, result: BatchResult,
                output_names: Sequence[str]) -> None:
    """Write one block's results: outputs and regime first (concurrently), the status ledger last."""
    from zarr.core.sync import sync

    sync(_write_block(zarr_store(path), block, result, list(output_names)))


async def _write_block(path: Any, block: Block, result: BatchResult, output_names: list[str]) -> None:
    import asyncio

    from zarr.api.asynchronous import open_group

    group = await open_group(path, mode="r+", zarr_format=3)
    # empty chunks are written too: a chunk file then exists for every written block, so a missing one is a
    # lost write that the integrity check can see by listing, not an all-NaN chunk zarr chose to elide
    arrays: list[Any] = [a.with_config({"write_empty_chunks": True}) for a in await asyncio.gather(  # type: ignore[union-attr]
        *(group.getitem(n) for n in [*output_names, metadata.REGIME_VAR, metadata.STATUS_VAR]))]
    shape = block.shape
    writes = []
    for name, arr in zip(output_names, arrays, strict=False):
        values = result.outputs[name]
        values = values.reshape(shape + values.shape[1:])
        writes.append(arr.setitem(block.slices + (slice(None),) * (values.ndim - len(shape)), values))
    writes.append(arrays[-2].setitem(block.slices, result.regime.reshape(shape)))
    await asyncio.gather(*writes)
    # only once every other chunk of the block is on disk does the ledger say the block is final
    await arrays[-1].setitem(block.slices, result.status.reshape(shape))
