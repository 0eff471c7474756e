"""Evaluate new points of a store's model, and record them in the store's point list.

The model is rebuilt from the store's attributes by registered name only
(:func:`sweepshell.models.make_model`); nothing read from a store is imported or executed.
A store written by another version of the model is refused: its points and the new ones
could not be compared.
"""

from __future__ import annotations

import logging
import math
import os
from collections.abc import Mapping
from dataclasses import InitVar, dataclass, field
from typing import Any

import numpy as np

from sweepshell.engine.blas_threads import one_blas_thread
from sweepshell.errors import QueryError, StoreMismatchError
from sweepshell.models import make_model
from sweepshell.models.base import TRUSTED_STATUSES, BatchResult, SweepModel
from sweepshell.query.boundary import EvaluatorFactory, RegimeEvaluator
from sweepshell.store import metadata
from sweepshell.store.integrity import check_model_limits
from sweepshell.store.metadata import ATTR

__all__ = ["PointEvaluator", "build_store_model", "store_evaluator"]

log = logging.getLogger(__name__)


def _settings_from_json(text: str | None) -> dict[str, Any]:
    settings: dict[str, Any] = metadata.load_record(text or "{}")
    # the store writes NaN settings as null (JSON has no NaN); give them back as NaN
    return {k: (math.nan if v is None else v) for k, v in settings.items()}


def build_store_model(attrs: Mapping[str, Any]) -> SweepModel:
    """Return the model that wrote a store, built from its recorded name and settings.

    Raises
    ------
    UnknownModelError
        If the model is not registered here.
    StoreMismatchError
        If the registered model's version differs from the store's.
    """
    name = attrs.get(ATTR.model)
    model = make_model(str(name), _settings_from_json(attrs.get(ATTR.settings)))
    check_model_limits(model, f"the store's recorded {ATTR.settings}")  # store records are input too
    stored = attrs.get(ATTR.model_version)
    if model.version != stored:
        raise StoreMismatchError(
            f"store was computed by {name} {stored}, but this sweepshell has {name} {model.version}; new points "
            "would not match the grid — run the sweep again into a new store", field="model_version",
            value=stored)
    return model


@dataclass
class PointEvaluator:
    """Evaluate points of a store's model at chosen axis values, the other parameters fixed.

    Attributes
    ----------
    store
        Path of the store (new points are appended to its point list when ``record``).
    attrs
        The store's attributes.
    fixed_axes
        Values of the sweep axes that are not varied (from the slice).
    record
        Whether to append evaluated points to the store.
    store_model
        The store's model (:func:`build_store_model`); built from ``attrs`` when not given, so a
        caller evaluating several views passes one model to all of them.
    """

    store: str | os.PathLike[str]
    attrs: Mapping[str, Any]
    fixed_axes: Mapping[str, Any]
    record: bool = False
    origin: str = "boundary"
    level: int = 0
    evaluations: int = 0
    model: SweepModel = field(init=False)
    store_model: InitVar[SweepModel | None] = None

    def __post_init__(self, store_model: SweepModel | None) -> None:
        self.model = store_model if store_model is not None else build_store_model(self.attrs)
        fixed = metadata.read_record(self.attrs, ATTR.fixed)
        self._fixed = {k: (math.nan if v is None else v) for k, v in fixed.items()}
        self._axes = list(metadata.read_record(self.attrs, ATTR.axes))

    def solve(self, varied: Mapping[str, np.ndarray]) -> BatchResult:
        """Evaluate the model where the named axes take the given values; record the points."""
        n = len(next(iter(varied.values())))
        axes_values: dict[str, np.ndarray] = {}
        for name in self._axes:
            if name in varied:
                axes_values[name] = np.asarray(varied[name])
            else:
                value = self.fixed_axes[name]
                axes_values[name] = (np.full(n, value, dtype=object) if isinstance(value, str)
                                     else np.full(n, float(value)))
        inputs: dict[str, np.ndarray] = {}
        for p in self.model.parameters:
            if p.name in axes_values:
                v = axes_values[p.name]
                inputs[p.name] = v.astype(str) if p.is_categorical else v.astype(np.float64)
            elif p.is_categorical:
                inputs[p.name] = np.full(n, str(self._fixed[p.name]))
            else:
                inputs[p.name] = np.full(n, float(self._fixed[p.name]))
        result = self._solve(inputs, n)
        self.evaluations += n
        if self.record:
            from sweepshell.store.points import append_points

            dims = self.model.extra_dims
            append_points(self.store, axes_values, result.outputs, result.regime, result.status, origin=self.origin,
                          level=self.level,
                          output_attrs={o.name: {"units": o.units, "long_name": o.doc} for o in self.model.outputs},
                          output_dims={o.name: o.dims for o in self.model.outputs if all(d in dims for d in o.dims)})
        return result

    def _solve(self, inputs: dict[str, np.ndarray], n: int) -> BatchResult:
        try:
            with one_blas_thread():
                return self.model.solve_batch(inputs)
        except Exception:  # a model bug: keep going, the points are recorded as failed
            log.exception("model %s raised on %d new points; they are marked failed", self.model.name, n)
            return self.model.empty_result(n)

    def regimes_at(self, x_axis: str, y_axis: str) -> RegimeEvaluator:
        """Return a function (x values, y values) → regime codes (−1 where untrusted)."""
        trusted = np.array(sorted(int(s) for s in TRUSTED_STATUSES))

        def evaluate(x: np.ndarray, y: np.ndarray) -> np.ndarray:
            result = self.solve({x_axis: x, y_axis: y})
            return np.where(np.isin(result.status, trusted), result.regime, -1)

        return evaluate


def store_evaluator(ds: Any, *, record: bool = False, origin: str = "boundary") -> EvaluatorFactory:
    """Return the boundary evaluator factory of an opened store (for :func:`~sweepshell.query.boundary.find_boundary`).

    Parameters
    ----------
    ds
        A store Dataset opened from a path (:func:`sweepshell.open_sweep`).
    record
        Whether new evaluations are appended to the store's point list.
    origin
        The origin recorded with those points.

    Raises
    ------
    QueryError
        If the Dataset was not opened from a store path.
    """
    source = ds.encoding.get("source")
    if not source:
        raise QueryError("the Dataset has no store path to record new points in; open it with "
                         "sweepshell.open_sweep or pass no evaluator", field="store")

    def factory(fixed_axes: Mapping[str, Any], x_axis: str, y_axis: str) -> RegimeEvaluator:
        evaluator = PointEvaluator(source, ds.attrs, fixed_axes, record=record, origin=origin)
        return evaluator.regimes_at(x_axis, y_axis)

    return factory
