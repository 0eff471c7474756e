"""What runs on a worker: evaluate one block of points and write it to the store.

Tasks receive plain data only (names, numbers, strings, slices), build the model from
the registry by name, and write their block directly into the store, so nothing but a
small status count travels back to the scheduler. A task is safe to run twice.
"""

from __future__ import annotations

import json
import logging
import time
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from sweepshell.engine.reuse import Donor, take_from_donors
from sweepshell.models import make_model
from sweepshell.models.base import BatchResult, Status, SweepModel
from sweepshell.plan import Block

__all__ = ["build_block_inputs", "compute_block", "solve_points"]

log = logging.getLogger(__name__)

_MODEL_CACHE: dict[tuple[str, str], SweepModel] = {}


def _cached_model(name: str, settings: Mapping[str, Any]) -> SweepModel:
    key = (name, json.dumps(dict(settings), sort_keys=True))
    model = _MODEL_CACHE.get(key)
    if model is None:
        model = _MODEL_CACHE[key] = make_model(name, dict(settings))
    return model


def build_block_inputs(model: SweepModel, axis_names: Sequence[str], axis_values: Sequence[np.ndarray],
                      fixed: Mapping[str, Any]) -> dict[str, np.ndarray]:
    """Return the model inputs of every point of a block (C order over the block's axes)."""
    grids = np.meshgrid(*[np.asarray(v) for v in axis_values], indexing="ij")
    n = grids[0].size if grids else 1
    inputs: dict[str, np.ndarray] = {}
    for name, grid in zip(axis_names, grids, strict=True):
        flat = grid.reshape(-1)
        inputs[name] = flat.astype(str) if flat.dtype == object else flat.astype(np.float64)
    for param in model.parameters:
        if param.name in inputs:
            continue
        value = fixed[param.name]
        if param.is_categorical:
            inputs[param.name] = np.full(n, value, dtype=f"<U{max(1, len(str(value)))}")
        else:
            inputs[param.name] = np.full(n, np.nan if value is None else float(value), dtype=np.float64)
    return inputs


def solve_points(model: SweepModel, inputs: Mapping[str, np.ndarray]) -> BatchResult:
    """Run ``model.solve_batch``; if it raises (a bug), retry point by point and mark raisers failed."""
    n = len(next(iter(inputs.values())))
    try:
        return _checked(model, model.solve_batch(inputs), n)
    except Exception:
        log.exception("model %s raised on a batch of %d points; retrying point by point", model.name, n)
    result = model.empty_result(n)
    for i in range(n):
        try:
            one = _checked(model, model.solve_batch({k: v[i:i + 1] for k, v in inputs.items()}), 1)
        except Exception:
            log.exception("model %s raised at point %s", model.name,
                          {k: v[i].item() if hasattr(v[i], "item") else v[i] for k, v in inputs.items()})
            continue
        for name, values in one.outputs.items():
            result.outputs[name][i] = values[0]
        result.status[i] = one.status[0]
        result.regime[i] = one.regime[0]
    return result


def _checked(model: SweepModel, result: BatchResult, n: int) -> BatchResult:
    """Enforce the model contract where the store depends on it."""
    dims = model.extra_dims
    for out in model.outputs:
        values = result.outputs[out.name]
        want = (n, *(dims[d] for d in out.dims))
        if values.shape != want:
            raise ValueError(f"model {model.name} output {out.name} has shape {values.shape}, expected {want}")
    if result.status.shape != (n,) or result.regime.shape != (n,):
        raise ValueError(f"model {model.name} status/regime shapes {result.status.shape}/{result.regime.shape}")
    if np.any(result.status == Status.pending):
        raise ValueError(f"model {model.name} returned status pending")
    return result


def compute_block(store_path: str, model_name: str, settings: Mapping[str, Any], axis_names: Sequence[str],
                  axis_values: Sequence[np.ndarray], fixed: Mapping[str, Any], block: Block,
                  donors: Sequence[Donor] = (), store_options: Mapping[str, Any] | None = None) -> dict[str, Any]:
    """Evaluate one block (copying what donors already have) and write it.

    ``store_options`` are the object-store options of the run (``store.options``), shipped with the
    task so that workers on other machines reach the same bucket. Returns status counts, points
    reused and the time spent in the model.
    """
    from sweepshell.store.location import register_options
    from sweepshell.store.writer import write_block

    register_options(store_path, store_options)

    model = _cached_model(model_name, settings)
    inputs = build_block_inputs(model, axis_names, axis_values, fixed)
    t0 = time.perf_counter()
    matched = np.zeros(block.n_points, dtype=bool)
    copied = None
    if donors:
        matched, copied = take_from_donors(donors, model, inputs)
    if copied is None:
        result = solve_points(model, inputs)
    elif matched.all():
        result = copied
    else:
        rest = np.flatnonzero(~matched)
        solved = solve_points(model, {k: v[rest] for k, v in inputs.items()})
        result = copied
        for name, values in solved.outputs.items():
            result.outputs[name][rest] = values
        result.status[rest] = solved.status
        result.regime[rest] = solved.regime
    model_seconds = time.perf_counter() - t0
    write_block(store_path, block, result, [o.name for o in model.outputs])
    counts = np.bincount(result.status, minlength=len(Status)).tolist()
    return {"index": block.index, "counts": counts, "model_seconds": model_seconds, "reused": int(matched.sum()),
            "seconds": time.perf_counter() - t0, "points": block.n_points}
