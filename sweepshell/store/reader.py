"""Open stores for reading: the Dataset for users, the ledger for the runner."""

from __future__ import annotations

import logging
import os
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from sweepshell.errors import StoreNotFoundError, StoreSchemaError
from sweepshell.store import metadata
from sweepshell.store.metadata import ATTR

if TYPE_CHECKING:
    import xarray as xr

    from sweepshell.plan import Block

__all__ = ["check_readable_store", "is_block_final", "open_sweep", "read_attrs", "read_ledger"]

log = logging.getLogger(__name__)


def check_readable_store(path: str | os.PathLike[str], *, chunks: bool = False) -> dict[str, Any]:
    """Return the store's attributes, or raise a clear error if it is not a store we can read.

    The metadata is always checked (a few small files); with ``chunks=True`` also that every
    final block holding trusted points has all its chunks (a listing, no decoding) — for commands
    that answer with values.
    """
    from sweepshell.store.chunk_checks import check_store_chunks
    from sweepshell.store.integrity import check_store_metadata, read_root_metadata

    p = Path(path)
    if not p.exists():
        raise StoreNotFoundError(f"no store at {str(p)!r}; check the path (stores are folders ending in .zarr)",
                                 field="store", value=str(p))
    try:
        root_meta = read_root_metadata(p)
    except (FileNotFoundError, NotADirectoryError):
        raise StoreSchemaError(f"{str(p)!r} is not a zarr store written by sweepshell; give a store folder",
                               field="store", value=str(p)) from None
    attrs: dict[str, Any] = root_meta.get("attributes") or {}
    if not isinstance(attrs, dict):
        attrs = {}
    schema = attrs.get(ATTR.schema)
    if schema is None:
        raise StoreSchemaError(f"{str(p)!r} is a zarr group but not a sweepshell store (no {ATTR.schema} "
                               "attribute); open it with xarray directly", field="store", value=str(p))
    if schema != metadata.SCHEMA_VERSION:
        raise StoreSchemaError(f"store {str(p)!r} has schema version {schema!r}; this sweepshell reads version "
                               f"{metadata.SCHEMA_VERSION}; upgrade sweepshell", field="store", value=str(p))
    check_store_metadata(p, root_meta)
    if chunks:
        check_store_chunks(p, attrs)
    return attrs


def read_attrs(path: str | os.PathLike[str]) -> dict[str, Any]:
    """Return the provenance attributes of a store (checked to be a known schema)."""
    return check_readable_store(path)


def open_sweep(path: str | os.PathLike[str], *, chunks: Any = "auto") -> xr.Dataset:
    """Open a sweep store as a lazy :class:`xarray.Dataset`.

    Parameters
    ----------
    path
        The store folder.
    chunks
        dask chunking, as for :func:`xarray.open_zarr`: ``"auto"`` (the store's blocks,
        merged up to dask's preferred size), ``{}`` (exactly the store's blocks), a mapping
        of dimension → size, or ``None`` (no dask: numpy arrays loaded on access).

    Raises
    ------
    StoreNotFoundError, StoreSchemaError
        If there is no store at ``path`` or its schema is unknown.
    """
    import xarray as xr

    check_readable_store(path, chunks=True)
    return xr.open_zarr(str(path), consolidated=True, zarr_format=3, chunks=chunks)


def read_ledger(path: str | os.PathLike[str], block_shape: tuple[int, ...] | None = None) -> np.ndarray:
    """Return the status ledger as a numpy array.

    A chunk that cannot be decoded (a run killed while writing it) reads as ``pending``, so
    its block is recomputed.
    """
    import zarr

    arr = zarr.open_array(str(Path(path) / metadata.STATUS_VAR), mode="r", zarr_format=3)
    try:
        return np.asarray(arr[...])
    except Exception:  # a torn chunk: fall back to reading chunk by chunk
        log.warning("ledger of %s has unreadable chunks; they will be recomputed", path)
    from sweepshell.plan import iter_blocks

    out = np.zeros(arr.shape, dtype=np.uint8)
    chunks = block_shape or tuple(arr.chunks)
    for block in iter_blocks(tuple(arr.shape), chunks):
        try:
            out[block.slices] = arr[block.slices]
        except Exception:
            out[block.slices] = 0
    return out


def is_block_final(path: str | os.PathLike[str], block: Block) -> bool:
    """Return whether every point of ``block`` has a final status (an unreadable chunk is not final)."""
    import zarr

    arr = zarr.open_array(str(Path(path) / metadata.STATUS_VAR), mode="r", zarr_format=3)
    try:
        return bool(np.all(np.asarray(arr[block.slices]) != 0))
    except Exception:
        return False
