"""Filling a merged store block by block from its two sources, and the conflicts found on the way."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np

from sweepshell.errors import StoreMismatchError, StoreSchemaError
from sweepshell.models.base import Status
from sweepshell.plan import iter_blocks
from sweepshell.store import metadata

__all__ = ["MergeConflictError", "fill_merged"]


class MergeConflictError(StoreMismatchError):
    """Both stores hold final but different values for some points."""


def _describe_point(names: list[str], values: list[Any]) -> str:
    return ", ".join(f"{n}={v:g}" if isinstance(v, float) else f"{n}={v}" for n, v in zip(names, values, strict=True))


def _differs(va: np.ndarray, vb: np.ndarray, rtol: float) -> np.ndarray:
    """Per point (first axis), whether two value arrays differ beyond ``rtol`` (NaN equals NaN)."""
    va = va.reshape(va.shape[0], -1)
    vb = vb.reshape(vb.shape[0], -1)
    if va.dtype.kind == "f" or vb.dtype.kind == "f":
        a64, b64 = va.astype(np.float64), vb.astype(np.float64)
        both_nan = np.isnan(a64) & np.isnan(b64)
        with np.errstate(invalid="ignore", over="ignore"):
            same = (a64 == b64) | (np.abs(a64 - b64) <= rtol * np.maximum(np.abs(a64), np.abs(b64)))
        return np.any(~(same | both_nan), axis=1)
    return np.any(va != vb, axis=1)


def _read_source(arr: Any, pos: list[np.ndarray], present: list[np.ndarray], block_shape: tuple[int, ...],
                 fill: Any, source: str, name: str) -> np.ndarray:
    """Read the part of a source array that falls in one block of the merged grid (fill elsewhere)."""
    extra = tuple(int(s) for s in arr.shape[len(pos):])
    out = np.full(block_shape + extra, fill, dtype=arr.dtype)
    if not all(p.any() for p in present):
        return out
    selection = tuple(p[m] for p, m in zip(pos, present, strict=True)) + (slice(None),) * len(extra)
    try:
        values = arr.get_orthogonal_selection(selection)
    except Exception as exc:  # a torn or corrupted chunk in a source
        raise StoreSchemaError(f"store {source!r} has an unreadable chunk in {name} ({type(exc).__name__}); run "
                               f"`sweepshell verify {source}` and recompute it before merging",
                               field="store", value=source) from None
    out[np.ix_(*[np.nonzero(m)[0] for m in present])] = values
    return out


def fill_merged(tmp: Path, a: str, b: str, group_a: Any, group_b: Any, names: list[str],
                union: dict[str, list[Any]], pos_a: list[np.ndarray], pos_b: list[np.ndarray], outputs: list[str],
                block_shape: tuple[int, ...], prefer: str | None, rtol: float) -> dict[str, int]:
    """Copy every block of the merged grid from the sources; return the counts of the report."""
    import zarr

    target = zarr.open_group(str(tmp), mode="r+", zarr_format=3)
    shape = tuple(len(union[n]) for n in names)
    counts = {"from_a": 0, "from_b": 0, "agreeing": 0, "conflicts": 0, "pending": 0}
    examples: list[str] = []
    value_vars = [*outputs, metadata.REGIME_VAR]
    for block in iter_blocks(shape, block_shape):
        idx = [np.arange(s.start, s.stop) for s in block.slices]
        pa = [p[i] for p, i in zip(pos_a, idx, strict=True)]
        pb = [p[i] for p, i in zip(pos_b, idx, strict=True)]
        ma = [p >= 0 for p in pa]
        mb = [p >= 0 for p in pb]
        bshape = block.shape
        status_a = _read_source(group_a[metadata.STATUS_VAR], pa, ma, bshape, Status.pending, a, metadata.STATUS_VAR)
        status_b = _read_source(group_b[metadata.STATUS_VAR], pb, mb, bshape, Status.pending, b, metadata.STATUS_VAR)
        final_a = status_a != Status.pending
        final_b = status_b != Status.pending
        if not (final_a.any() or final_b.any()):
            counts["pending"] += block.n_points
            continue
        values_a = {v: _read_source(group_a[v], pa, ma, bshape, group_a[v].fill_value, a, v) for v in value_vars}
        values_b = {v: _read_source(group_b[v], pb, mb, bshape, group_b[v].fill_value, b, v) for v in value_vars}
        both = final_a & final_b
        conflict = both & (status_a != status_b)
        for v in value_vars:
            flat_differs = _differs(values_a[v].reshape(block.n_points, -1), values_b[v].reshape(block.n_points, -1),
                                    rtol)
            conflict |= both & flat_differs.reshape(bshape)
        use_b = final_b & (~final_a | (conflict & (prefer == "b")))
        use_a = final_a & ~use_b
        n_conflicts = int(conflict.sum())
        counts["conflicts"] += n_conflicts
        counts["agreeing"] += int((both & ~conflict).sum())
        counts["from_a"] += int(use_a.sum())
        counts["from_b"] += int(use_b.sum())
        counts["pending"] += int((~final_a & ~final_b).sum())
        if n_conflicts and prefer is None:
            for where in np.argwhere(conflict)[: 5 - len(examples)]:
                point = [union[n][i] for n, i in zip(names, _grid_index(where, idx), strict=True)]
                diffs = [v for v in value_vars
                         if _differs(values_a[v][tuple(where)][None], values_b[v][tuple(where)][None], rtol)[0]]
                what = ", ".join(f"{v} {_show(values_a[v][tuple(where)])} vs {_show(values_b[v][tuple(where)])}"
                                 for v in diffs[:2])
                if status_a[tuple(where)] != status_b[tuple(where)]:
                    what = (f"status {_status_name(status_a[tuple(where)])} vs "
                            f"{_status_name(status_b[tuple(where)])}" + (f", {what}" if what else ""))
                examples.append(f"({_describe_point(names, point)}: {what})")
            continue  # nothing is kept anyway: the merge will stop
        if prefer is None and counts["conflicts"]:
            continue
        for v in value_vars:  # outputs and regime first, the ledger last (see store/writer.py)
            arr: Any = target[v].with_config({"write_empty_chunks": True})  # type: ignore[union-attr]
            merged = np.full(values_a[v].shape, arr.fill_value, dtype=values_a[v].dtype)
            merged[use_a] = values_a[v][use_a]
            merged[use_b] = values_b[v][use_b]
            arr[block.slices + (slice(None),) * (merged.ndim - len(bshape))] = merged
        status = np.where(use_a, status_a, np.where(use_b, status_b, Status.pending)).astype(np.uint8)
        ledger: Any = target[metadata.STATUS_VAR]
        ledger[block.slices] = status
    if counts["conflicts"] and prefer is None:
        raise MergeConflictError(
            f"stores {a!r} and {b!r} hold different final values at {counts['conflicts']} points, e.g. "
            f"{'; '.join(examples)}; choose a side with --prefer a or --prefer b (nothing was written)",
            field="prefer", value=counts["conflicts"])
    return counts


def _grid_index(where: np.ndarray, idx: list[np.ndarray]) -> list[int]:
    """Return the merged-grid indices of a position inside a block."""
    return [int(i[w]) for i, w in zip(idx, where, strict=True)]


def _show(value: np.ndarray) -> str:
    arr = np.asarray(value)
    if arr.ndim:
        return f"[{arr.size} values]"
    return f"{arr.item():.10g}" if arr.dtype.kind == "f" else str(arr.item())


def _status_name(code: Any) -> str:
    try:
        return Status(int(code)).name
    except ValueError:
        return f"code {int(code)}"
