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

from sweepshell.models.base import BatchResult, SweepModel
from sweepshell.plan import SweepPlan
from sweepshell.store import metadata
from sweepshell.store.metadata import ATTR, canonical_json

__all__ = ["Donor", "find_donors", "take_from_donors"]

log = logging.getLogger(__name__)


@dataclass(frozen=True)
class Donor:
    """A store whose points may be copied: its axes (name → value → index) and fixed values."""

    path: str
    axis_names: tuple[str, ...]
    axis_index: tuple[tuple[str, tuple[tuple[Any, int], ...]], ...]
    fixed: tuple[tuple[str, Any], ...]

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
            attrs = metadata.read_node(store)["attributes"]
            axes: dict[str, list[Any]] = metadata.read_record(attrs, ATTR.axes)
            fixed: dict[str, Any] = metadata.read_record(attrs, ATTR.fixed)
            order = _axis_order(store, axes)
        except (OSError, ValueError, KeyError, TypeError):
            log.warning("skipping unreadable store %s as a reuse source", store)
            continue
        donors.append(Donor(
            path=str(store), axis_names=tuple(order),
            axis_index=tuple((name, tuple((_canonical(v), i) for i, v in enumerate(axes[name]))) for name in order),
            fixed=tuple((k, _canonical(v)) for k, v in fixed.items())))
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
            if result is None:
                result = model.empty_result(n)
            for out in model.outputs:
                extra = result.outputs[out.name].shape[1:]
                # broadcast the point coordinates against the whole of any extra dimensions
                sel = tuple(w.reshape((-1,) + (1,) * len(extra)) for w in where) + tuple(
                    np.arange(k).reshape((1, *(k if j == i else 1 for j in range(len(extra)))))
                    for i, k in enumerate(extra))
                result.outputs[out.name][rows] = np.asarray(group[out.name].vindex[sel])  # type: ignore[union-attr]
            result.regime[rows] = np.asarray(group[metadata.REGIME_VAR].vindex[where])  # type: ignore[union-attr]
            result.status[rows] = status[final]
            matched[rows] = True
        except Exception:  # an unreadable donor is skipped, never trusted
            log.warning("could not read reuse source %s; computing instead", donor.path, exc_info=True)
    return matched, result

