"""The frozen plan of a sweep: its axes, fixed parameters, settings and executor.

A plan is built once, at the door, from a validated config; everything downstream (store,
runner, workers) takes it as given.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

__all__ = ["IN_PROCESS_SECONDS", "Axis", "ExecutorSpec", "SweepPlan"]

#: ``executor.kind: auto`` computes in the calling process when the estimated work is at most this many seconds:
#: starting local worker processes (spawn, imports, loading compiled kernels) costs several seconds on its own.
IN_PROCESS_SECONDS = 5.0


@dataclass(frozen=True)
class Axis:
    """One swept parameter.

    Attributes
    ----------
    name
        The model parameter swept (also the store dimension name).
    values
        The axis values in order (floats, or strings for categorical parameters).
    spacing
        ``"linear"``, ``"log"`` or ``"list"``: how the values were given (plots use log axes
        for ``"log"``).
    """

    name: str
    values: tuple[Any, ...]
    spacing: str = "list"

    @property
    def is_categorical(self) -> bool:
        return bool(self.values) and isinstance(self.values[0], str)

    def to_array(self) -> np.ndarray:
        """Return the values as a numpy array (float64, or object strings)."""
        if self.is_categorical:
            return np.array(self.values, dtype=object)
        return np.asarray(self.values, dtype=np.float64)

    def __len__(self) -> int:
        return len(self.values)


@dataclass(frozen=True)
class ExecutorSpec:
    """Where blocks run: ``auto``, ``local`` worker processes, ``threads`` or a ``distributed`` cluster.

    ``auto`` computes in the calling process (no cluster) when the estimated work is at most
    ``in_process_seconds``, and on local worker processes otherwise; the other kinds are obeyed as given.
    """

    kind: str = "auto"
    workers: int | None = None
    address: str | None = None
    in_process_seconds: float = IN_PROCESS_SECONDS

    def runs_in_process(self, estimated_seconds: float) -> bool:
        """Whether work of ``estimated_seconds`` (one core) is computed in the calling process."""
        return self.kind == "auto" and estimated_seconds <= self.in_process_seconds


@dataclass(frozen=True)
class SweepPlan:
    """A validated, frozen sweep.

    Attributes
    ----------
    name
        Sweep name (the default store is ``results/<name>.zarr``).
    model
        Registered model name.
    model_version
        Version of the model class at plan time.
    settings
        The model's numerical settings, complete (defaults filled in).
    fixed
        Every non-swept parameter with its value (defaults filled in; NaN = not given).
    axes
        The swept parameters in store-dimension order.
    store_path
        Where the store lives.
    executor
        Where blocks run.
    block_points
        Target number of points per block (the actual block shape comes from
        :func:`choose_block_shape`, or from the store's chunks when it exists).
    resolved_yaml
        The fully resolved sweep as YAML (recorded in the store).
    reuse
        Whether points already computed in compatible stores beside this one are copied.
    point_seconds
        The model's estimated seconds per point on one core with these settings (``estimated_cost``).
    refine
        ``None``, or ``{"levels": L, "x": AXIS|None, "y": AXIS|None}``: after the grid is complete, evaluate
        new points along regime boundaries, level by level (see :mod:`sweepshell.engine.refine`).
    store_options
        Options of the object-store filesystem (``store.options``: endpoint, credentials); never recorded
        in the store, and left out of the plan's repr.
    """

    name: str
    model: str
    model_version: str
    settings: dict[str, Any]
    fixed: dict[str, Any]
    axes: tuple[Axis, ...]
    store_path: str
    executor: ExecutorSpec = field(default_factory=ExecutorSpec)
    block_points: int = 1024
    resolved_yaml: str = ""
    reuse: bool = True
    refine: dict[str, Any] | None = None
    store_options: dict[str, Any] = field(default_factory=dict, repr=False)
    point_seconds: float = 0.0

    def estimated_seconds(self, points: int | None = None) -> float:
        """Estimated work of ``points`` points (all of the sweep by default) in seconds on one core."""
        return self.point_seconds * (self.n_points if points is None else points)

    def describe_executor(self, points: int | None = None) -> str:
        """Say where the blocks run, e.g. ``runs in this process: estimated 0.4 s of work``."""
        seconds = self.estimated_seconds(points)
        spec = self.executor
        if spec.runs_in_process(seconds):
            where = "runs in this process"
        elif spec.kind in ("auto", "local"):
            where = f"runs on {spec.workers or 'one per core'} local worker process(es)"
        elif spec.kind == "threads":
            where = f"runs on {spec.workers or 1} thread(s) of a dask cluster in this process"
        else:
            where = f"runs on the dask cluster at {spec.address}"
        return f"{where}: estimated {seconds:.3g} s of work (executor {spec.kind})"

    @property
    def shape(self) -> tuple[int, ...]:
        return tuple(len(a) for a in self.axes)

    @property
    def n_points(self) -> int:
        return math.prod(self.shape)

    @property
    def axis_names(self) -> tuple[str, ...]:
        return tuple(a.name for a in self.axes)

    def with_store_path(self, path: str) -> SweepPlan:
        """Return a copy writing to another store."""
        from dataclasses import replace

        return replace(self, store_path=path)
