"""The contract every model keeps, as one function plug-in authors can run: :func:`check_model`.

The checks follow the model seam (:mod:`sweepshell.models.base`): complete declarations,
sample points inside the declared bounds, outputs of the declared shapes and dtypes, status
and regime codes of the right kind, NaN exactly where the status is not trustworthy,
determinism and batch invariance (a point's answer never depends on the other points of its
batch). Each failed check raises :class:`ModelContractError` naming the model, the check
and what to change.

This module imports numpy only, like every model.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from typing import Any, NoReturn

import numpy as np

from sweepshell.errors import ParameterError
from sweepshell.models.base import TRUSTED_STATUSES, BatchResult, Status, SweepModel

__all__ = ["ModelContractError", "check_model"]


class ModelContractError(AssertionError):
    """A model breaks the contract of the model seam; the message names the check and the fix."""


def check_model(model_cls: type[SweepModel], settings: Mapping[str, Any] | None = None, *,
                inputs: Mapping[str, np.ndarray] | None = None, rtol: float = 1e-9) -> None:
    """Run the model contract on ``model_cls`` and raise at the first broken rule.

    Parameters
    ----------
    model_cls
        The :class:`SweepModel` subclass to check (not an instance).
    settings
        Numerical settings to build it with; its defaults when ``None``.
    inputs
        The points to solve (parameter name → 1-D array); ``model_cls.sample_inputs()`` when
        ``None``. Include points of every status the model can return.
    rtol
        Relative tolerance of the batch-invariance comparison (reordering may change the last
        bits of vectorised arithmetic); determinism is checked bit for bit.

    Raises
    ------
    ModelContractError
        With one message naming the model, the broken rule and how to fix it.

    Examples
    --------
    >>> from sweepshell.testing import check_model
    >>> check_model(MyRingModel)  # doctest: +SKIP
    """
    who = getattr(model_cls, "__name__", repr(model_cls))

    def fail(message: str) -> NoReturn:
        raise ModelContractError(f"check_model({who}): {message}")

    if not (isinstance(model_cls, type) and issubclass(model_cls, SweepModel)):
        fail("is not a subclass of sweepshell.models.SweepModel; derive the model class from it")
    try:
        model = model_cls(**dict(settings or {}))
    except Exception as exc:
        fail(f"cannot be built with settings {dict(settings or {})} ({type(exc).__name__}: {exc}); numerical "
             "settings must be keyword-only constructor arguments with defaults")
    _check_declarations(model, fail)
    points = dict(model_cls.sample_inputs() if inputs is None else inputs)
    n = _check_inputs(model, points, fail)
    first = _solve(model, points, fail)
    _check_result(model, first, n, fail)
    again = _solve(model, points, fail)
    _check_same(model, first, again, None, 0.0, "solving the same points twice", fail)
    order = np.arange(n)[::-1]
    reversed_ = _solve(model, {k: np.asarray(v)[order] for k, v in points.items()}, fail)
    _check_same(model, first, reversed_, order, rtol, "solving the points in reverse order", fail)
    singles = [_solve(model, {k: np.asarray(v)[i:i + 1] for k, v in points.items()}, fail) for i in range(n)]
    joined = BatchResult(outputs={o.name: np.concatenate([s.outputs[o.name] for s in singles])
                                  for o in model.outputs},
                         status=np.concatenate([s.status for s in singles]),
                         regime=np.concatenate([s.regime for s in singles]))
    _check_same(model, first, joined, None, rtol, "solving the points one at a time", fail)
    try:
        json.dumps(model.describe(), allow_nan=False)
    except (TypeError, ValueError) as exc:
        fail(f"describe() is not plain JSON ({exc}); settings must be plain numbers, strings, booleans or None")


def _check_declarations(model: SweepModel, fail: Any) -> None:
    for attr in ("name", "version"):
        if not isinstance(getattr(model, attr, None), str) or not getattr(model, attr):
            fail(f"declares no {attr}; set the class attribute {attr} to a non-empty string")
    if not model.name.isidentifier() or model.name != model.name.lower():
        fail(f"name {model.name!r} is not a lower-case identifier; use snake_case like 'elastic_ring'")
    regimes = getattr(model, "regimes", ())
    if not regimes or len(set(regimes)) != len(regimes) or not all(isinstance(r, str) and r for r in regimes):
        fail("regimes must be a non-empty tuple of distinct names")
    if len(regimes) > 127:
        fail("has more than 127 regimes; regime codes are stored as int8")
    names = [p.name for p in model.parameters]
    if not names or len(names) != len(set(names)):
        fail(f"parameters {names} must be a non-empty tuple with distinct names")
    for p in model.parameters:
        if not p.units or not p.doc:
            fail(f"parameter {p.name!r} needs units (\"1\" when dimensionless) and a one-line doc")
        if p.choices is None and not p.bounds[0] <= p.bounds[1]:
            fail(f"parameter {p.name!r} has bounds {p.bounds} with low above high")
        if p.default is not None and not _is_nan(p.default):  # NaN default: "not given", allowed by design
            try:
                p.check_values(p.default, where=f"default of {p.name}")
            except ParameterError as exc:
                fail(f"{exc}")
    extra = model.extra_dims
    outputs = [o.name for o in model.outputs]
    if not outputs or len(outputs) != len(set(outputs)):
        fail(f"outputs {outputs} must be a non-empty tuple with distinct names")
    clash = set(outputs) & ({*names, "status", "regime"})
    if clash:
        fail(f"output name(s) {sorted(clash)} clash with a parameter or a store variable; rename them")
    for o in model.outputs:
        if not o.units or not o.doc:
            fail(f"output {o.name!r} needs units and a one-line doc")
        if np.dtype(o.dtype).kind != "f":
            fail(f"output {o.name!r} has dtype {o.dtype}; outputs are floating point (NaN marks no value)")
        missing = [d for d in o.dims if d not in extra]
        if missing:
            fail(f"output {o.name!r} has dimension(s) {missing} without a length in extra_dims")
    if not (isinstance(model.cost_hint, (int, float)) and model.cost_hint > 0 and math.isfinite(model.cost_hint)):
        fail(f"cost_hint={model.cost_hint!r} must be a positive number of seconds per point")


def _check_inputs(model: SweepModel, points: dict[str, np.ndarray], fail: Any) -> int:
    wanted = {p.name for p in model.parameters}
    if set(points) != wanted:
        fail(f"sample inputs give {sorted(points)} but the parameters are {sorted(wanted)}; give every "
             "parameter and nothing else")
    lengths = {k: np.asarray(v).shape for k, v in points.items()}
    if len(set(lengths.values())) != 1 or len(next(iter(lengths.values()))) != 1:
        fail(f"sample inputs must be 1-D arrays of one length; got shapes {lengths}")
    n = int(next(iter(lengths.values()))[0])
    if n < 2:
        fail("sample inputs hold fewer than 2 points; batch invariance needs several")
    for p in model.parameters:
        values = np.asarray(points[p.name])
        given = list(values) if p.is_categorical else [float(v) for v in values]
        if _is_nan(p.default):
            given = [v for v in given if not _is_nan(v)]
        try:
            p.check_values(given,
                           where=f"sample input {p.name}")
        except ParameterError as exc:
            fail(f"{exc} (sample inputs must lie inside the declared bounds)")
    return n


def _is_nan(v: Any) -> bool:
    return isinstance(v, (float, np.floating)) and math.isnan(v)


def _solve(model: SweepModel, points: Mapping[str, np.ndarray], fail: Any) -> BatchResult:
    try:
        result = model.solve_batch(points)
    except Exception as exc:
        fail(f"solve_batch raised {type(exc).__name__}: {exc}; a point that cannot be solved returns a status "
             "(failed, not_converged, outside_validity) and NaN outputs instead of raising")
    if not isinstance(result, BatchResult):
        fail(f"solve_batch returned {type(result).__name__}; return a sweepshell.models.BatchResult")
    return result


def _check_result(model: SweepModel, result: BatchResult, n: int, fail: Any) -> None:
    status, regime = np.asarray(result.status), np.asarray(result.regime)
    if status.dtype != np.uint8 or status.shape != (n,):
        fail(f"status has dtype {status.dtype} and shape {status.shape}; expected uint8 of shape ({n},)")
    if regime.dtype != np.int8 or regime.shape != (n,):
        fail(f"regime has dtype {regime.dtype} and shape {regime.shape}; expected int8 of shape ({n},)")
    known = [int(s) for s in Status if s is not Status.pending]
    if not np.all(np.isin(status, known)):
        fail(f"status holds codes {sorted(set(status.tolist()) - set(known))}; use Status codes 1-5 (never 0 "
             "pending)")
    trusted = np.isin(status, [int(s) for s in TRUSTED_STATUSES])
    if not np.all((regime >= 0) == trusted):
        bad = int(np.argmax((regime >= 0) != trusted))
        fail(f"point {bad} has status {Status(int(status[bad])).name} and regime {int(regime[bad])}; the regime "
             "is -1 exactly where the status is not ok or no_instability")
    if np.any(regime >= len(model.regimes)):
        fail(f"regime codes reach {int(regime.max())} but only {len(model.regimes)} regimes are declared")
    extra = model.extra_dims
    missing = sorted({o.name for o in model.outputs} - set(result.outputs))
    if missing:
        fail(f"solve_batch did not return output(s) {missing}")
    for o in model.outputs:
        values = np.asarray(result.outputs[o.name])
        shape = (n, *(extra[d] for d in o.dims))
        if values.dtype != np.dtype(o.dtype) or values.shape != shape:
            fail(f"output {o.name!r} has dtype {values.dtype} and shape {values.shape}; declared {o.dtype} of "
                 f"shape {shape}")
        flat = values.reshape(n, -1)
        leaked = ~trusted & ~np.all(np.isnan(flat), axis=1)
        if np.any(leaked):
            bad = int(np.argmax(leaked))
            fail(f"output {o.name!r} has values at point {bad} whose status is {Status(int(status[bad])).name}; "
                 "set outputs to NaN wherever the status is not ok or no_instability")
        if not o.nullable:
            holes = (status == Status.ok) & ~np.all(np.isfinite(flat), axis=1)
            if np.any(holes):
                bad = int(np.argmax(holes))
                fail(f"output {o.name!r} is NaN or infinite at point {bad} with status ok; return a failure "
                     "status there, or declare the output nullable=True and document what NaN means")


def _check_same(model: SweepModel, a: BatchResult, b: BatchResult, order: np.ndarray | None, rtol: float,
                how: str, fail: Any) -> None:
    def pick(x: np.ndarray) -> np.ndarray:
        return np.asarray(x) if order is None else np.asarray(x)[order]

    rule = "deterministic" if rtol == 0 else "batch-invariant (a point's answer never depends on its batch)"
    if not np.array_equal(a.status, pick(b.status)) or not np.array_equal(a.regime, pick(b.regime)):
        fail(f"status or regime changed when {how}; solve_batch must be {rule}")
    for o in model.outputs:
        x, y = np.asarray(a.outputs[o.name]), pick(b.outputs[o.name])
        same = np.array_equal(x, y, equal_nan=True) if rtol == 0 else np.allclose(
            x, y, rtol=rtol, atol=1e-12, equal_nan=True)
        if not same:
            fail(f"output {o.name!r} changed when {how}; solve_batch must be {rule}")
