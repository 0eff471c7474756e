"""From a plain sweep mapping to a validated, frozen :class:`SweepPlan` (no hydra).

Every check of a sweep's content lives here: known keys and a valid name, the model by
registered name and its settings, axes and fixed values against the model's parameters, the
grid size limit, executor, block size, reuse and refinement. Each failure is a
:class:`~sweepshell.errors.ConfigError` or :class:`~sweepshell.errors.ParameterError` naming
the field and the fix.
"""

from __future__ import annotations

import inspect
import json
import logging
import math
import os
import re
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np
import yaml
from omegaconf import DictConfig, ListConfig, OmegaConf

from sweepshell.errors import ConfigError, ParameterError, SweepshellError, UnknownModelError
from sweepshell.models import get_model
from sweepshell.models.base import SweepModel
from sweepshell.plan import IN_PROCESS_SECONDS, Axis, ExecutorSpec, SweepPlan
from sweepshell.store.integrity import check_model_limits
from sweepshell.store.location import public_options, read_store_config

log = logging.getLogger(__name__)

__all__ = ["DEFAULT_MAX_POINTS", "EXECUTOR_KINDS", "MAX_WORKERS", "SWEEP_KEYS", "build_plan", "snap_decimals"]

SWEEP_KEYS = ("name", "model", "settings", "fixed", "axes", "store", "executor", "block", "limits",
              "description", "reuse", "refine")
EXECUTOR_KINDS = ("auto", "local", "threads", "distributed")
DEFAULT_MAX_POINTS = 20_000_000
MAX_WORKERS = 512
_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]*$")


def build_plan(cfg: Mapping[str, Any], *, source: str = "<dict>") -> SweepPlan:
    """Validate a plain sweep mapping into a :class:`SweepPlan` (no hydra needed).

    Useful from Python: ``build_plan({"model": ..., "fixed": ..., "axes": ...})``.
    """
    cfg = dict(cfg)
    name = _check_keys_and_name(cfg, source)
    model_name = cfg.get("model")
    if model_name is None:
        raise ConfigError(f"{source} names no model; add model: NAME (see `sweepshell models`)",
                          field="model")
    try:
        model_cls = get_model(model_name)
    except UnknownModelError:
        store_cfg = cfg.get("store") or {}
        _check_missing_plugin(model_name, store_cfg.get("path") or os.path.join("results", f"{name}.zarr"))
        raise
    model = _build_checked_model(model_cls, cfg.get("settings") or {})
    settings = model.settings
    fixed_in, axes_in, max_points = _check_grid_request(cfg)
    axes, fixed = _build_parameters(model_cls, fixed_in, axes_in)
    n_points = math.prod(len(a) for a in axes)
    executor = _build_executor(cfg.get("executor") or {})
    block_points = _choose_block_points(cfg.get("block") or {}, model, executor, n_points)
    reuse = cfg.get("reuse", True)
    if not isinstance(reuse, bool):
        raise ConfigError(f"reuse={reuse!r} must be true or false", field="reuse", value=reuse)
    refine = _build_refine(cfg.get("refine"), [a.name for a in axes])
    point_seconds = float(model.estimated_cost())
    in_process = executor.kind == "threads" or executor.runs_in_process(point_seconds * n_points)
    store_path, store_options = read_store_config(cfg.get("store"), os.path.join("results", f"{name}.zarr"),
                                                  process_workers=not in_process)
    resolved = {
        "name": name,
        "model": model_name,
        "settings": settings,
        "fixed": {k: _plain(v) for k, v in fixed.items()},
        "axes": {a.name: [_plain(v) for v in a.values] for a in axes},
        "store": {"path": str(store_path), **({"options": public_options(store_options)} if store_options else {})},
        "executor": {"kind": executor.kind, "workers": executor.workers, "address": executor.address,
                     "in_process_seconds": executor.in_process_seconds},
        "block": {"points": block_points},
        "limits": {"max_points": max_points},
        "reuse": reuse,
        "refine": refine,
    }
    return SweepPlan(
        name=name, model=model_name, model_version=model_cls.version, settings=settings, fixed=fixed,
        axes=tuple(axes), store_path=str(store_path), executor=executor, block_points=block_points,
        resolved_yaml=yaml.safe_dump(resolved, sort_keys=False), reuse=reuse, refine=refine,
        store_options=store_options,
        point_seconds=point_seconds,
    )


def _check_keys_and_name(cfg: Mapping[str, Any], source: str) -> str:
    """Return the sweep's name; raise ConfigError for unknown keys or a bad name."""
    unknown = sorted(set(cfg) - set(SWEEP_KEYS))
    if unknown:
        raise ConfigError(f"sweep has unknown key(s) {', '.join(unknown)}; allowed keys are "
                          f"{', '.join(SWEEP_KEYS)}", field=unknown[0], value=unknown)
    name = cfg.get("name") or Path(source).stem
    if not isinstance(name, str) or not _NAME_RE.match(name):
        raise ConfigError(f"name={name!r} is not a valid sweep name; use letters, digits, '_', '-', '.'",
                          field="name", value=name)
    return name


def _check_grid_request(cfg: Mapping[str, Any]) -> tuple[dict[str, Any], dict[str, Any], int]:
    """Return the fixed and axes mappings and the point limit, the grid size checked from the axis forms.

    The size comes from the forms, before any axis is expanded into values.
    """
    fixed_in = cfg.get("fixed") or {}
    axes_in = cfg.get("axes") or {}
    if not isinstance(fixed_in, dict):
        raise ConfigError("fixed must be a mapping of parameter name to value", field="fixed", value=fixed_in)
    if not axes_in:
        raise ConfigError("the sweep has no axes; add at least one under axes: (e.g. "
                          "shell_parameter: {linspace: [3, 12, 10]})", field="axes")
    if not isinstance(axes_in, dict):
        raise ConfigError("axes must be a mapping of parameter name to values", field="axes", value=axes_in)
    limits = cfg.get("limits") or {}
    if not isinstance(limits, dict):
        raise ConfigError("limits must be a mapping (limits: {max_points: N})", field="limits", value=limits)
    max_points = _positive_int(limits.get("max_points", DEFAULT_MAX_POINTS), "limits.max_points")
    lengths = {pname: _axis_length(f"axes.{pname}", spec) for pname, spec in axes_in.items()}
    if math.prod(lengths.values()) > max_points:
        shape = " x ".join(str(n) for n in lengths.values())
        raise ConfigError(f"the grid has {math.prod(lengths.values())} points ({shape}), above "
                          f"limits.max_points={max_points}; use fewer axis values or raise limits.max_points",
                          field="axes", value=math.prod(lengths.values()))
    return fixed_in, axes_in, max_points


def _build_parameters(model_cls: type[SweepModel], fixed_in: Mapping[str, Any],
                      axes_in: Mapping[str, Any]) -> tuple[list[Axis], dict[str, Any]]:
    """Return the checked axes and fixed values (defaults filled in) of a sweep."""
    axes: list[Axis] = []
    for pname, spec in axes_in.items():
        param = model_cls.get_parameter(pname)
        axis = _build_axis(pname, spec)
        param.check_values(list(axis.values), where=f"axes.{pname}")
        axes.append(axis)
    fixed: dict[str, Any] = {}
    for pname, value in fixed_in.items():
        param = model_cls.get_parameter(pname)
        if pname in axes_in:
            raise ConfigError(f"parameter {pname!r} is both fixed and swept; remove it from fixed or axes",
                              field=pname)
        if isinstance(value, (list, dict)):
            raise ConfigError(f"fixed.{pname}={value!r} is not a single value; move it to axes to sweep it",
                              field=f"fixed.{pname}", value=value)
        if value is None and isinstance(param.default, float) and math.isnan(param.default):
            fixed[pname] = param.default  # an optional parameter left unset (recorded plans write null)
            continue
        if isinstance(value, float) and not math.isfinite(value) and not param.admits_infinity:
            raise ConfigError(f"fixed.{pname}={value!r} is not a finite number; give a finite value "
                              f"({param.describe_allowed()})", field=f"fixed.{pname}", value=value)
        param.check_values(value, where=f"fixed.{pname}")
        fixed[pname] = float(value) if not param.is_categorical else value
    for param in model_cls.parameters:
        if param.name in axes_in or param.name in fixed:
            continue
        if param.default is None:
            raise ParameterError(f"parameter {param.name!r} of model {model_cls.name!r} is required; add it "
                                 f"to fixed or axes ({param.describe_allowed()})", field=param.name)
        fixed[param.name] = param.default
    model_cls.check_combination(fixed, {a.name: a.to_array() for a in axes})
    return axes, fixed


def _choose_block_points(block: Mapping[str, Any], model: SweepModel, executor: ExecutorSpec, n_points: int) -> int:
    """Return the points per block: given, or sized for ``block.target_seconds`` of model time."""
    if block.get("points") is not None:
        return _positive_int(block["points"], "block.points")
    seconds = float(block.get("target_seconds", 2.0))
    if not seconds > 0:
        raise ConfigError(f"block.target_seconds={seconds} must be positive", field="block.target_seconds")
    block_points = int(min(1_000_000, max(16, seconds / max(model.estimated_cost(), 1e-9))))
    # enough blocks to keep every worker busy and the progress bar moving (the store keeps the chunking it
    # was created with, so a later run with another worker count still resumes it)
    workers = executor.workers or os.cpu_count() or 1
    return max(16, min(block_points, math.ceil(n_points / (4 * workers))))


def _check_missing_plugin(model_name: Any, store_path: str) -> None:
    """Raise naming the missing package when the sweep's store was made by a plug-in that is not installed."""
    from sweepshell.store.metadata import ATTR, has_node
    from sweepshell.store.reader import read_attrs

    if not isinstance(model_name, str) or not has_node(store_path):
        return
    try:
        attrs = read_attrs(store_path)
    except SweepshellError:
        return
    package = attrs.get(ATTR.model_package)
    if attrs.get(ATTR.model) != model_name or not package or package == "sweepshell":
        return
    raise UnknownModelError(
        f"model {model_name!r} comes from package {package!r} (version {attrs.get(ATTR.model_package_version)}, "
        f"recorded in {store_path}), which is not installed; install it (pip install {package}) to run this sweep",
        field="model", value=model_name, allowed=f"package {package}")


def _plain(v: Any) -> Any:
    if isinstance(v, float) and math.isnan(v):
        return None
    return v


def _axis_length(where: str, spec: Any) -> int:
    """Return how many values an axis form gives, without expanding it (0 when malformed: checked later)."""
    if isinstance(spec, (DictConfig, ListConfig)):
        spec = OmegaConf.to_container(spec)
    if isinstance(spec, (list, tuple)):
        return len(spec)
    if not (isinstance(spec, dict) and len(spec) == 1):
        return 0
    form, args = next(iter(spec.items()))
    if not (isinstance(args, (list, tuple)) and len(args) == 3 and all(
            isinstance(a, (int, float)) and not isinstance(a, bool) and math.isfinite(a) for a in args)):
        return 0
    a, b, c = (float(x) for x in args)
    if form == "range":
        return max(0, math.ceil((b - a) / c - 1e-9)) if c != 0 else 0
    return int(c) if form in ("linspace", "logspace") and c >= 1 else 0


def _positive_int(value: Any, where: str) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) \
            or value != int(value) or value < 1:
        raise ConfigError(f"{where}={value!r} must be a whole number ≥ 1", field=where, value=value)
    return int(value)


def _build_checked_model(model_cls: type[SweepModel], settings: Any) -> SweepModel:
    if not isinstance(settings, dict):
        raise ConfigError("settings must be a mapping of setting name to value", field="settings",
                          value=settings)
    sig = inspect.signature(model_cls.__init__)
    allowed = [p for p in sig.parameters if p != "self" and sig.parameters[p].kind == inspect.Parameter.KEYWORD_ONLY]
    for key in settings:
        if key not in allowed:
            raise ConfigError(f"settings.{key} is not a setting of model {model_cls.name!r}; use one of "
                              f"{', '.join(allowed) or '(none)'}", field=f"settings.{key}", value=key)
    try:
        model = model_cls(**settings)
    except (TypeError, ValueError, OverflowError) as exc:
        raise ConfigError(f"settings {json.dumps(settings)} rejected by model {model_cls.name!r}: {exc}",
                          field="settings", value=settings) from None
    check_model_limits(model, "settings", ConfigError)
    return model


def _build_axis(name: str, spec: Any) -> Axis:
    where = f"axes.{name}"
    if isinstance(spec, (DictConfig, ListConfig)):
        spec = OmegaConf.to_container(spec)
    spacing = "list"
    if isinstance(spec, dict):
        if len(spec) != 1 or next(iter(spec)) not in ("linspace", "logspace", "range"):
            raise ConfigError(f"{where}={spec!r} is not an axis form; use a list, {{linspace: [start, stop, "
                              "count]}, {logspace: [exp_start, exp_stop, count]} or {range: [start, stop, step]}",
                              field=where, value=spec)
        form, args = next(iter(spec.items()))
        values = _expand_form(where, form, args)
        spacing = {"linspace": "linear", "logspace": "log", "range": "linear"}[form]
    elif isinstance(spec, (list, tuple)):
        values = list(spec)
        nums = [v for v in values if isinstance(v, (int, float)) and not isinstance(v, bool)]
        if values and len(nums) == len(values) and len(values) >= 3 and all(v > 0 for v in nums):
            ratios = np.diff(np.log(np.asarray(nums, dtype=float)))
            if np.allclose(ratios, ratios[0], rtol=1e-6) and abs(ratios[0]) > 0.5:
                spacing = "log"
    else:
        raise ConfigError(f"{where}={spec!r} is a single value; an axis needs several values (a list, "
                          "linspace, logspace or range) — or move it to fixed", field=where, value=spec)
    if not values:
        raise ConfigError(f"{where} has no values; give at least one", field=where, value=spec)
    kinds = {isinstance(v, str) for v in values}
    if len(kinds) > 1:
        raise ConfigError(f"{where} mixes names and numbers ({values!r}); use one kind", field=where,
                          value=values)
    if not isinstance(values[0], str):
        for v in values:
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                raise ConfigError(f"{where} value {v!r} is neither a number nor a name", field=where, value=v)
            if not math.isfinite(v):
                raise ConfigError(f"{where} value {v!r} is not a finite number; give finite values",
                                  field=where, value=v)
        values = [float(v) for v in values]
    seen: set[Any] = set()
    dupes = [v for v in values if v in seen or seen.add(v)]  # type: ignore[func-returns-value]
    if dupes:
        raise ConfigError(f"{where} repeats value(s) {sorted(set(dupes))[:5]}; each value may appear once",
                          field=where, value=dupes)
    return Axis(name=name, values=tuple(values), spacing=spacing)


def _expand_form(where: str, form: str, args: Any) -> list[float]:
    if not isinstance(args, (list, tuple)) or len(args) != 3 or not all(
            isinstance(a, (int, float)) and not isinstance(a, bool) and math.isfinite(a) for a in args):
        raise ConfigError(f"{where}: {form} takes three numbers [start, stop, {'step' if form == 'range' else 'count'}]"
                          f", got {args!r}", field=where, value=args)
    a, b, c = (float(x) for x in args)
    if form == "range":
        if c == 0 or (b - a) / c < 0:
            raise ConfigError(f"{where}: range [{a:g}, {b:g}, {c:g}] has no values; the step must point from "
                              "start to stop", field=where, value=args)
        count = math.ceil((b - a) / c - 1e-9)
        if count > 100_000_000:
            raise ConfigError(f"{where}: range has {count} values; use a larger step", field=where, value=args)
        return snap_decimals([a + i * c for i in range(count)], max(abs(a), abs(b), abs(c)))
    if c != int(c) or c < 1:
        raise ConfigError(f"{where}: {form} count={c:g} must be a whole number ≥ 1", field=where, value=args)
    if c > 100_000_000:
        raise ConfigError(f"{where}: {form} count={int(c)} is absurdly large; use fewer values", field=where,
                          value=args)
    if form == "linspace":
        return snap_decimals(np.linspace(a, b, int(c)), max(abs(a), abs(b)))
    if max(abs(a), abs(b)) > 300:
        raise ConfigError(f"{where}: logspace exponents [{a:g}, {b:g}] overflow; use base-10 exponents within "
                          "±300", field=where, value=args)
    low, high = min(a, b), max(a, b)
    if 0 < low < 1 and high / low >= 10:  # e.g. [0.001, 1]: reads like values, not exponents
        log.warning("%s: logspace takes base-10 exponents; [%g, %g] gives %g … %g. If you meant those as values, "
                    "write {logspace: [%g, %g, %d]}", where, a, b, 10 ** a, 10 ** b,
                    math.log10(a) if a > 0 else a, math.log10(b) if b > 0 else b, int(c))
    return [snap_decimals([float(v)], abs(float(v)))[0] for v in np.logspace(a, b, int(c))]


def snap_decimals(values: Any, scale: float) -> list[float]:
    """Return ``values`` with those within a few ulps of ``scale`` from a short decimal set to that decimal.

    ``linspace``, ``range`` and ``logspace`` compute values in binary, so 0 comes out as −2.8·10⁻¹⁷ and
    0.3 as 0.30000000000000004; a query for ``x == 0`` would then find nothing. Rounding to 12
    significant digits of ``scale`` and keeping the result only when it moves the value by at
    most 16 ulps of ``scale`` makes exact decimals exact and leaves other values (1/3) alone.
    """
    out = []
    tolerance = 16 * np.finfo(float).eps * scale
    quantum = 10.0 ** (math.floor(math.log10(scale)) - 12) if scale > 0 and math.isfinite(scale) else 0.0
    for v in values:
        v = float(v)
        if quantum > 0:
            short = float(f"{round(v / quantum) * quantum:.15g}")
            if abs(short - v) <= tolerance:
                v = short
        out.append(v + 0.0)  # no negative zero
    return out


def _build_refine(spec: Any, axis_names: list[str]) -> dict[str, Any] | None:
    if spec is None or spec is False:
        return None
    if not isinstance(spec, dict) or set(spec) - {"levels", "x", "y"}:
        raise ConfigError(f"refine={spec!r} is not a refinement; use refine: {{levels: 3, x: AXIS, y: AXIS}} "
                          "(x and y optional)", field="refine", value=spec)
    levels = spec.get("levels", 3)
    if isinstance(levels, bool) or not isinstance(levels, int) or not 1 <= levels <= 12:
        raise ConfigError(f"refine.levels={levels!r} must be a whole number from 1 to 12", field="refine.levels",
                          value=levels)
    for key in ("x", "y"):
        if spec.get(key) is not None and spec[key] not in axis_names:
            raise ConfigError(f"refine.{key}={spec[key]!r} is not an axis of this sweep; use one of "
                              f"{', '.join(axis_names)}", field=f"refine.{key}", value=spec[key])
    return {"levels": levels, "x": spec.get("x"), "y": spec.get("y")}


def _build_executor(spec: Mapping[str, Any]) -> ExecutorSpec:
    kind = spec.get("kind", "auto")
    if kind not in EXECUTOR_KINDS:
        raise ConfigError(f"executor.kind={kind!r} is unknown; use one of {', '.join(EXECUTOR_KINDS)}",
                          field="executor.kind", value=kind)
    workers = spec.get("workers")
    if workers is not None:
        workers = _positive_int(workers, "executor.workers")
        if workers > MAX_WORKERS:
            raise ConfigError(f"executor.workers={workers} is more than {MAX_WORKERS} worker processes on one "
                              "machine; use executor=distributed for a cluster", field="executor.workers",
                              value=workers)
    address = spec.get("address")
    if kind == "distributed" and not address:
        raise ConfigError("executor=distributed needs an address; add executor.address=tcp://HOST:PORT",
                          field="executor.address")
    seconds = spec.get("in_process_seconds", IN_PROCESS_SECONDS)
    if isinstance(seconds, bool) or not isinstance(seconds, (int, float)) or not 0 <= seconds < math.inf:
        raise ConfigError(f"executor.in_process_seconds={seconds!r} must be a number of seconds ≥ 0",
                          field="executor.in_process_seconds", value=seconds)
    return ExecutorSpec(kind=kind, workers=workers, address=address, in_process_seconds=float(seconds))
