"""Reuse: never pay twice for a point already computed in a compatible store.

A donor is a store under the same results folder made by the same model, model version and
settings (exact match of the recorded strings, via the catalog). A point of a new sweep is
copied from a donor when every one of its inputs matches exactly: each parameter is either
one of the donor's axis values or equal to the donor's fixed value. Only final statuses are
copied; because models are deterministic and batch-invariant, a copied point is exactly
what recomputing it would give.
"""

from __future__ import annotations

import logging
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from sweepshell.errors import SweepshellError
from sweepshell.models.base import TRUSTED_STATUSES, BatchResult, SweepModel
from sweepshell.plan import SweepPlan
from sweepshell.store import metadata
from sweepshell.store.chunk_checks import find_blocks_missing_chunks
from sweepshell.store.metadata import ATTR, canonical_json
from sweepshell.store.reader import check_readable_store, read_ledger

__all__ = ["Donor", "find_donors", "take_from_donors"]

log = logging.getLogger(__name__)

_TRUSTED = np.array(sorted(int(s) for s in TRUSTED_STATUSES))


@dataclass(frozen=True)
class Donor:
    """A store whose points may be copied: its axes (name → value → index) and fixed values."""

    path: str
    axis_names: tuple[str, ...]
    axis_index: tuple[tuple[str, tuple[tuple[Any, int], ...]], ...]
    fixed: tuple[tuple[str, Any], ...]
    block_shape: tuple[int, ...] = ()
    damaged_blocks: frozenset[tuple[int, ...]] = frozenset()

    def lookup(self) -> tuple[dict[str, dict[Any, int]], dict[str, Any]]:
        return ({name: dict(pairs) for name, pairs in self.axis_index}, dict(self.fixed))


def _canonical(value: Any) -> Any:
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return None
    if isinstance(value, (int, float, np.floating, np.integer)) and not isinstance(value, bool):
        return float(value)
    return str(value)


def find_donors(plan: SweepPlan, model: SweepModel) -> list[Donor]:
    """Return the compatible stores beside the plan's store (never the store itself)."""
    from sweepshell.store.catalog import find_compatible_stores

    target = Path(plan.store_path).resolve()
    stores = find_compatible_stores(target.parent, plan.model, plan.model_version, canonical_json(model.settings))
    donors = []
    for store in stores:
        if store.resolve() == target:
            continue
        try:
            attrs = check_readable_store(store)  # a store with damaged metadata is never a source
            axes: dict[str, list[Any]] = metadata.read_record(attrs, ATTR.axes)
            fixed: dict[str, Any] = metadata.read_record(attrs, ATTR.fixed)
            order = _axis_order(store, axes)
            block_shape = tuple(int(b) for b in attrs[ATTR.block_shape])
            # blocks that lost a chunk are never copied from (their trusted points would read as NaN)
            damaged = find_blocks_missing_chunks(store, read_ledger(store, block_shape), block_shape,
                                                 [o.name for o in model.outputs] + [metadata.REGIME_VAR])
        except (OSError, ValueError, KeyError, TypeError, SweepshellError):
            log.warning("skipping unreadable or damaged store %s as a reuse source", store)
            continue
        donors.append(Donor(
            path=str(store), axis_names=tuple(order),
            axis_index=tuple((name, tuple((_canonical(v), i) for i, v in enumerate(axes[name]))) for name in order),
            fixed=tuple((k, _canonical(v)) for k, v in fixed.items()), block_shape=block_shape,
            damaged_blocks=frozenset(damaged)))
    return donors


def _axis_order(store: Path, axes: Mapping[str, Any]) -> list[str]:
    return [n for n in metadata.dimension_names(store, metadata.STATUS_VAR) if n in axes]


def take_from_donors(donors: Sequence[Donor], model: SweepModel, inputs: Mapping[str, np.ndarray],
                     ) -> tuple[np.ndarray, BatchResult | None]:
    """Copy every point of ``inputs`` that a donor has with a final status.

    Returns
    -------
    matched, result
        A boolean mask of the copied points and a full-size result holding them (``None`` if none).
    """
    import zarr

    n = len(next(iter(inputs.values())))
    matched = np.zeros(n, dtype=bool)
    result: BatchResult | None = None
    for donor in donors:
        if matched.all():
            break
        index_of, fixed = donor.lookup()
        ok = ~matched
        idx = {name: np.full(n, -1, dtype=np.int64) for name in donor.axis_names}
        for p in model.parameters:
            values = [_canonical(v) for v in np.asarray(inputs[p.name]).tolist()]
            if p.name in index_of:
                table = index_of[p.name]
                found = np.array([table.get(v, -1) for v in values], dtype=np.int64)
                idx[p.name] = found
                ok &= found >= 0
            elif p.name in fixed:
                ok &= np.array([v == fixed[p.name] for v in values], dtype=bool)
            else:
                ok &= False
        if ok.any() and donor.damaged_blocks and len(donor.block_shape) == len(donor.axis_names):
            blocks = zip(*(idx[name] // b for name, b in zip(donor.axis_names, donor.block_shape, strict=True)),
                         strict=True)
            ok &= ~np.array([tuple(int(i) for i in blk) in donor.damaged_blocks for blk in blocks], dtype=bool)
        if not ok.any():
            continue
        try:
            group = zarr.open_group(donor.path, mode="r", zarr_format=3)
            where = tuple(idx[name][ok] for name in donor.axis_names)
            status = np.asarray(group[metadata.STATUS_VAR].vindex[where])  # type: ignore[union-attr]
            final = status != 0
            if not final.any():
                continue
            rows = np.flatnonzero(ok)[final]
            where = tuple(w[final] for w in where)
            status = status[final]
            copied: dict[str, np.ndarray] = {}
            # a trusted point whose non-nullable output reads NaN lost its value: never copied
            usable = np.ones(rows.size, dtype=bool)
            trusted = np.isin(status, _TRUSTED)
            for out in model.outputs:
                extra = model.extra_dims
                extra_shape = tuple(extra[d] for d in out.dims)
                # broadcast the point coordinates against the whole of any extra dimensions
                sel = tuple(w.reshape((-1,) + (1,) * len(extra_shape)) for w in where) + tuple(
                    np.arange(k).reshape((1, *(k if j == i else 1 for j in range(len(extra_shape)))))
                    for i, k in enumerate(extra_shape))
                got = np.asarray(group[out.name].vindex[sel])  # type: ignore[union-attr]
                copied[out.name] = got
                if not out.nullable and got.dtype.kind == "f":
                    usable &= ~(trusted & np.isnan(got.reshape(rows.size, -1)).all(axis=-1))
            regime = np.asarray(group[metadata.REGIME_VAR].vindex[where])  # type: ignore[union-attr]
            usable &= ~(trusted & (regime < 0))
            if not usable.any():
                continue
            if result is None:
                result = model.empty_result(n)
            rows = rows[usable]
            for name, got in copied.items():
                result.outputs[name][rows] = got[usable]
            result.regime[rows] = regime[usable]
            result.status[rows] = status[usable]
            matched[rows] = True
        except Exception as exc:  # an unreadable donor is skipped, never trusted
            log.warning("could not read reuse source %s (%s); computing instead", donor.path, type(exc).__name__)
            log.info("reuse source %s failed", donor.path, exc_info=True)
    return matched, result

