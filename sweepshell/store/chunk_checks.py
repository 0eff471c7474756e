"""Store integrity, chunks: every chunk a final block needs, and trusted values that are really there.

Every block whose ledger says final and that holds a trusted point has a chunk file of every
output and of ``regime`` (writers write empty chunks too, so a missing file is a lost write,
never an elided all-NaN one). Blocks holding only untrusted points need none: the fill values
(NaN, regime -1) are exactly what the ledger prescribes. Chunk files are found by listing the
array folders, which costs a directory walk, not a decode. The metadata side is
:mod:`sweepshell.store.integrity`.
"""

from __future__ import annotations

import itertools
import os
from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import Any

import numpy as np

from sweepshell.errors import StoreDamagedError
from sweepshell.models.base import TRUSTED_STATUSES
from sweepshell.store import metadata
from sweepshell.store.integrity import declared_outputs, read_root_metadata
from sweepshell.store.metadata import ATTR

__all__ = ["check_store_chunks", "check_trusted_values", "consolidated_outputs", "find_blocks_missing_chunks",
           "find_undecodable_chunk"]

_TRUSTED = np.array(sorted(int(s) for s in TRUSTED_STATUSES))


def find_blocks_missing_chunks(path: str | os.PathLike[str], ledger: np.ndarray, block_shape: tuple[int, ...],
                               variables: Iterable[str]) -> dict[tuple[int, ...], list[str]]:
    """Return ``{block index: [variables missing a chunk]}`` for final blocks holding a trusted point.

    Parameters
    ----------
    path
        The store.
    ledger
        The status ledger (as read, unreadable chunks as pending).
    block_shape
        The store's block (= chunk) shape over the axes.
    variables
        The arrays to check (outputs and ``regime``); a missing array misses every chunk.
    """
    from sweepshell.plan import iter_blocks

    root = Path(path)
    needy: list[tuple[int, ...]] = []
    for block in iter_blocks(tuple(ledger.shape), block_shape):
        status = ledger[block.slices]
        if status.size and np.all(status != 0) and np.isin(status, _TRUSTED).any():
            needy.append(block.index)
    if not needy:
        return {}
    missing: dict[tuple[int, ...], list[str]] = {}
    for name in variables:
        present = metadata.list_chunk_indices(root / name)
        if present is None:
            continue
        extra = metadata.extra_chunk_counts(root / name, len(block_shape))
        for index in needy:
            if any((*index, *rest) not in present for rest in itertools.product(*(range(c) for c in extra))):
                missing.setdefault(index, []).append(name)
    return missing


def check_store_chunks(path: str | os.PathLike[str], attrs: Mapping[str, Any] | None = None) -> None:
    """Raise :class:`StoreDamagedError` if a final block holding trusted points lost a chunk.

    Reads the ledger and lists the array folders (no values are decoded), so every command
    that reads values can afford it before answering.
    """
    from sweepshell.store.reader import read_attrs, read_ledger

    attrs = attrs if attrs is not None else read_attrs(path)
    try:
        block_shape = tuple(int(b) for b in attrs[ATTR.block_shape])
    except (KeyError, TypeError, ValueError):
        return  # reported by the attribute checks of verify
    outputs = declared_outputs(attrs)
    names: list[str] = [*(outputs or consolidated_outputs(path)), metadata.REGIME_VAR]
    lost = find_blocks_missing_chunks(path, read_ledger(path, block_shape), block_shape, names)
    if lost:
        index, variables = next(iter(sorted(lost.items())))
        more = f" (and {len(lost) - 1} more blocks)" if len(lost) > 1 else ""
        raise StoreDamagedError(f"store {str(path)!r} lost data: {', '.join(variables)} block {list(index)} has no "
                                f"chunk although its status is final{more}; run `sweepshell verify --repair {path}`, "
                                "then run the sweep again", field="store", value=str(path))


def consolidated_outputs(path: str | os.PathLike[str]) -> list[str]:
    """Return the data variables other than status and regime, from the consolidated metadata."""
    meta = read_root_metadata(path)
    entries = metadata.consolidated_entries(meta)
    status_dims = (entries.get(metadata.STATUS_VAR) or {}).get("dimension_names") or []
    return [n for n, e in entries.items()
            if "/" not in n and isinstance(e, dict) and e.get("node_type") == "array"
            and n not in (metadata.STATUS_VAR, metadata.REGIME_VAR)
            and (e.get("dimension_names") or [])[:len(status_dims)] == status_dims and len(status_dims) > 0]


def check_trusted_values(values: np.ndarray, status: np.ndarray, name: str, attrs: Mapping[str, Any],
                         path: str | os.PathLike[str] | None = None) -> None:
    """Raise :class:`StoreDamagedError` if a non-nullable output is NaN at a trusted point.

    ``values`` and ``status`` are flat per point (extra dimensions, if any, trailing in ``values``).
    """
    values = np.asarray(values)
    if values.dtype.kind != "f" or values.size == 0:
        return
    missing = np.isnan(values.reshape(status.shape[0], -1)).all(axis=-1) & np.isin(status, _TRUSTED)
    if not missing.any():
        return  # the model's output declarations are looked up only when they matter
    outputs = declared_outputs(attrs)
    if outputs is None or name not in outputs or outputs[name].nullable:
        return
    if missing.any():
        where = f" {path}" if path is not None else " STORE"
        raise StoreDamagedError(f"store{'' if path is None else ' ' + repr(str(path))} holds {int(missing.sum())} "
                                f"trusted points without a value of {name} (lost data); run "
                                f"`sweepshell verify --repair{where}`, then run the sweep again",
                                field="store", value=name)


def find_undecodable_chunk(path: str | os.PathLike[str]) -> tuple[str, tuple[int, ...]] | None:
    """Return ``(variable, block index)`` of the first chunk on disk that does not decode, or ``None``.

    Decodes every chunk, so it is meant for explaining a failed read, not for routine checks.
    """
    import zarr

    root = Path(path)
    try:
        meta = read_root_metadata(root)
    except (FileNotFoundError, StoreDamagedError):
        return None
    entries = metadata.consolidated_entries(meta)
    status_dims = (entries.get(metadata.STATUS_VAR) or {}).get("dimension_names") or []
    for name in sorted(n for n, e in entries.items() if isinstance(e, dict) and e.get("node_type") == "array"):
        present = metadata.list_chunk_indices(root / name)
        if not present:
            continue
        try:
            arr = zarr.open_array(str(root / name), mode="r", zarr_format=3)
        except Exception:
            return name, ()
        for index in sorted(present):
            try:
                arr.get_block_selection(index)
            except Exception:
                return name, index[:len(status_dims)] if "/" not in name else index
    return None
