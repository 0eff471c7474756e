"""A store at a glance (``sweepshell status``): read with zarr alone, no xarray or dask."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import numpy as np

from sweepshell.models.base import Status
from sweepshell.store.metadata import ATTR, STATUS_VAR, dimension_names, read_record
from sweepshell.store.reader import check_readable_store, read_ledger

__all__ = ["summarize_store"]


def summarize_store(path: str | os.PathLike[str]) -> dict[str, Any]:
    """Return a JSON-ready summary: model, version, axes, counts per status, completeness."""
    attrs = check_readable_store(path)
    block_shape = tuple(int(b) for b in attrs[ATTR.block_shape])
    ledger = read_ledger(path, block_shape)
    raw = np.bincount(ledger.reshape(-1), minlength=len(Status))
    counts = {s.name: int(raw[s.value]) for s in Status}
    total = int(ledger.size)
    axes_values: dict[str, list[Any]] = read_record(attrs, ATTR.axes)
    order = [d for d in dimension_names(path, STATUS_VAR) if d in axes_values]  # plan order, not sorted keys
    axes = []
    for name in order:
        values = axes_values[name]
        numeric = [v for v in values if isinstance(v, (int, float))]
        axes.append({"name": name, "size": len(values),
                     "min": min(numeric) if numeric else values[0],
                     "max": max(numeric) if numeric else values[-1],
                     "values": values if len(values) <= 12 else None})
    size = sum(f.stat().st_size for f in Path(path).rglob("*") if f.is_file())
    return {
        "path": str(path),
        "sweep": attrs.get(ATTR.sweep_name),
        "model": attrs.get(ATTR.model),
        "model_version": attrs.get(ATTR.model_version),
        "model_package": attrs.get(ATTR.model_package),
        "model_package_version": attrs.get(ATTR.model_package_version),
        "sweepshell_version": attrs.get(ATTR.tool),
        "created": attrs.get(ATTR.created),
        "axes": axes,
        "block_shape": list(block_shape),
        "total": total,
        "counts": counts,
        "complete": counts[Status.pending.name] == 0,
        "complete_fraction": (total - counts[Status.pending.name]) / total if total else 1.0,
        "settings": read_record(attrs, ATTR.settings, "{}"),
        "fixed": read_record(attrs, ATTR.fixed, "{}"),
        "bytes_on_disk": size,
    }
