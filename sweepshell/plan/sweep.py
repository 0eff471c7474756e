"""The frozen plan of a sweep: its axes, fixed parameters, settings and executor.

A plan is built once, at the door, from a validated config; everything downstream (store,
runner, workers) takes it as given.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

__all__ = ["Axis", "ExecutorSpec", "SweepPlan"]


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
    """Where blocks run: ``local`` worker processes, ``threads`` or a ``distributed`` cluster."""

    kind: str = "local"
    workers: int | None = None
    address: str | None = None


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
