"""From a sweep file and command-line overrides to a validated, frozen :class:`SweepPlan`.

This is the only module that touches hydra. It uses hydra's compose API (no run
directories, no logging set-up, no multirun launcher) for ``configs/config.yaml`` and the
executor presets, and hydra's override parser for the command line, including sweep forms
on axes (``axes.shell_parameter=range(3,12,0.5)``, ``axes.poisson_ratio=0.2,0.3,0.4``).

Nothing in a config is ever imported or executed: the model is looked up by registered name
and every value is plain data.
"""

from __future__ import annotations

import inspect
import json
import logging
import math
import os
import re
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import yaml
from omegaconf import DictConfig, ListConfig, OmegaConf

from sweepshell.errors import ConfigError, ParameterError
from sweepshell.models import get_model
from sweepshell.models.base import SweepModel
from sweepshell.plan import IN_PROCESS_SECONDS, Axis, ExecutorSpec, SweepPlan
from sweepshell.store.integrity import check_model_limits, check_store_path

log = logging.getLogger(__name__)

__all__ = ["find_config_dir", "load_plan", "parse_overrides", "resolve_sweep_file"]

SWEEP_KEYS = ("name", "model", "settings", "fixed", "axes", "store", "executor", "block", "limits",
              "description", "reuse", "refine")
EXECUTOR_KINDS = ("auto", "local", "threads", "distributed")
DEFAULT_MAX_POINTS = 20_000_000
MAX_WORKERS = 512
_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]*$")


def find_config_dir(explicit: str | os.PathLike[str] | None = None) -> Path:
    """Return the ``configs/`` folder: the explicit one, ``./configs``, or the checkout's."""
    candidates = []
    if explicit is not None:
        candidates.append(Path(explicit))
    env = os.environ.get("SWEEPSHELL_CONFIG_DIR")
    if env:
        candidates.append(Path(env))
    candidates.append(Path.cwd() / "configs")
    candidates.append(Path(__file__).resolve().parents[2] / "configs")
    for c in candidates:
        if (c / "config.yaml").is_file():
            return c.resolve()
    raise ConfigError(
        "no configs/config.yaml found (looked in " + ", ".join(str(c) for c in candidates)
        + "); run from the project folder or pass --config-dir", field="config_dir")


def resolve_sweep_file(sweep: str, config_dir: Path) -> Path:
    """Return the YAML file of ``sweep``: a path, or a name in ``configs/sweep/``."""
    p = Path(sweep)
    from sweepshell.store.metadata import is_store

    if is_store(p):
        raise ConfigError(f"{sweep!r} is a store, not a sweep file; `sweepshell run STORE` continues it from its "
                          "recorded sweep", field="sweep", value=sweep)
    if p.suffix in (".yaml", ".yml") or os.sep in sweep or p.is_file():
        if p.is_file():
            return p
        raise ConfigError(f"sweep file {sweep!r} does not exist; give an existing YAML file or a name in "
                          f"{config_dir / 'sweep'}", field="sweep", value=sweep)
    candidate = config_dir / "sweep" / f"{sweep}.yaml"
    if candidate.is_file():
        return candidate
    names = sorted(f.stem for f in (config_dir / "sweep").glob("*.yaml"))
    raise ConfigError(f"sweep {sweep!r} is neither a file nor a name in {config_dir / 'sweep'}; "
                      f"use one of {', '.join(names) or '(none)'} or a path to a YAML file",
                      field="sweep", value=sweep)


def parse_overrides(overrides: Sequence[str]) -> list[Any]:
    """Parse command-line overrides with hydra's grammar; one clear error for a bad one."""
    from hydra.core.override_parser.overrides_parser import OverridesParser
    from hydra.errors import HydraException

    parser = OverridesParser.create()
    parsed = []
    for text in overrides:
        if "${" in text:
            raise ConfigError(f"override {text!r} uses ${{...}} interpolation, which sweeps do not support; "
                              "write the value itself", field="override", value=text)
        try:
            parsed.append(parser.parse_override(text))
        except HydraException as exc:
            reason = str(exc).splitlines()[0]
            raise ConfigError(f"override {text!r} is malformed ({reason}); write key=value, e.g. "
                              "fixed.poisson_ratio=0.3 or axes.shell_parameter=range(3,12,0.5)",
                              field="override", value=text) from None
    return parsed


def _compose_base(config_dir: Path, group_overrides: list[str]) -> DictConfig:
    from hydra import compose, initialize_config_dir
    from hydra.core.global_hydra import GlobalHydra
    from hydra.errors import HydraException
    from omegaconf.errors import OmegaConfBaseException

    GlobalHydra.instance().clear()
    try:
        with initialize_config_dir(config_dir=str(config_dir), version_base=None):
            cfg = compose(config_name="config", overrides=group_overrides)
    except (HydraException, OmegaConfBaseException) as exc:
        presets = sorted(f.stem for f in (config_dir / "executor").glob("*.yaml"))
        raise ConfigError(f"{' '.join(group_overrides)} could not be applied ({str(exc).splitlines()[0]}); "
                          f"executor presets are {', '.join(presets)}", field="executor",
                          value=group_overrides) from None
    finally:
        GlobalHydra.instance().clear()
    return cfg


#: largest sweep file read, bytes (a sweep is a few hundred bytes; this bounds what a loader ever builds)
MAX_SWEEP_FILE_BYTES = 256_000


class _YamlRefused(yaml.YAMLError):
    """A construct sweep files may not use (anchors, aliases, duplicate keys)."""

    def __init__(self, what: str, line: int | None) -> None:
        super().__init__(what)
        self.what = what
        self.line = line


class _SweepYamlLoader(yaml.SafeLoader):
    """Safe YAML that also reads ``70.0e9`` and ``1e-3`` as numbers (YAML 1.1 wants a dot and a sign).

    Anchors and aliases are refused as they are met, before any node is built from them, so an
    alias bomb costs nothing; a key given twice in one mapping is refused instead of silently
    keeping the last value.
    """

    def compose_node(self, parent: Any, index: Any) -> Any:
        event = self.peek_event()
        if isinstance(event, yaml.AliasEvent) or getattr(event, "anchor", None) is not None:
            raise _YamlRefused("anchors and aliases (& and *) are not allowed; write the values out",
                               event.start_mark.line if event.start_mark else None)
        return super().compose_node(parent, index)

    def construct_mapping(self, node: Any, deep: bool = False) -> Any:
        if isinstance(node, yaml.MappingNode):
            seen: set[Any] = set()
            for key_node, _ in node.value:
                key = self.construct_object(key_node, deep=True)
                if isinstance(key, (str, int, float, bool)) and key in seen:
                    raise _YamlRefused(f"key {key!r} is given twice; keep one",
                                       key_node.start_mark.line if key_node.start_mark else None)
                seen.add(key)
        return super().construct_mapping(node, deep=deep)


_SweepYamlLoader.add_implicit_resolver(
    "tag:yaml.org,2002:float",
    re.compile(r"^[-+]?(?:[0-9][0-9_]*(?:\.[0-9_]*)?|\.[0-9_]+)[eE][-+]?[0-9]+$"),
    list("-+0123456789."))


def _load_sweep_yaml(path: Path) -> DictConfig:
    try:
        size = path.stat().st_size
    except OSError as exc:
        raise ConfigError(f"sweep file {path} cannot be read ({exc.strerror}); check the path",
                          field="sweep", value=str(path)) from None
    if size > MAX_SWEEP_FILE_BYTES:
        raise ConfigError(f"sweep file {path} is {size} bytes, above {MAX_SWEEP_FILE_BYTES}; a sweep file names "
                          "axes by their form (linspace, logspace, range), not by listing huge value tables",
                          field="sweep", value=str(path))
    try:
        text = path.read_text()
        data = yaml.load(text, Loader=_SweepYamlLoader)  # a SafeLoader subclass: builds plain data only
    except UnicodeDecodeError:
        raise ConfigError(f"sweep file {path} is not UTF-8 text; save it as UTF-8", field="sweep",
                          value=str(path)) from None
    except _YamlRefused as exc:
        where = f" at line {exc.line + 1}" if exc.line is not None else ""
        raise ConfigError(f"sweep file {path}{where}: {exc.what}", field="sweep", value=str(path)) from None
    except RecursionError:
        raise ConfigError(f"sweep file {path} is nested too deeply; a sweep is a few flat mappings",
                          field="sweep", value=str(path)) from None
    except yaml.YAMLError as exc:
        line = getattr(getattr(exc, "problem_mark", None), "line", None)
        where = f" at line {line + 1}" if line is not None else ""
        raise ConfigError(f"sweep file {path} is not valid YAML{where}; fix the syntax",
                          field="sweep", value=str(path)) from None
    if not isinstance(data, dict):
        raise ConfigError(f"sweep file {path} must hold a mapping (name, model, fixed, axes, ...); "
                          f"it holds {type(data).__name__}", field="sweep", value=str(path))
    unknown = sorted(set(data) - set(SWEEP_KEYS))
    if unknown:
        raise ConfigError(f"sweep file {path} has unknown key(s) {', '.join(unknown)}; allowed keys are "
                          f"{', '.join(SWEEP_KEYS)}", field=unknown[0], value=unknown)
    if "name" not in data:
        data["name"] = path.stem
    _check_no_interpolation(data, f"sweep file {path}")
    return OmegaConf.create(data)


def _check_no_interpolation(value: Any, where: str, key: str = "") -> None:
    """Refuse ``${...}`` anywhere: nothing in a sweep is resolved from the environment or other keys.

    The recorded sweep is then exactly what was written, and no resolver (``oc.env``, loops, missing
    keys) ever runs on user input.
    """
    if isinstance(value, str) and "${" in value:
        raise ConfigError(f"{where}: {key or 'a value'}={value[:60]!r} uses ${{...}} interpolation, which sweeps "
                          "do not support; write the value itself", field=key or None, value=value[:60])
    if isinstance(value, dict):
        for k, v in value.items():
            _check_no_interpolation(str(k), where, key)
            _check_no_interpolation(v, where, f"{key}.{k}" if key else str(k))
    elif isinstance(value, (list, tuple)):
        for v in value:
            _check_no_interpolation(v, where, key)


def load_plan(sweep: str, overrides: Sequence[str] = (), *, config_dir: str | os.PathLike[str] | None = None,
              ) -> SweepPlan:
    """Build the validated plan of a sweep.

    Parameters
    ----------
    sweep
        A name in ``configs/sweep/`` or a path to a YAML file.
    overrides
        Command-line overrides in hydra's grammar.
    config_dir
        The ``configs/`` folder; found automatically when ``None``.

    Raises
    ------
    ConfigError, ParameterError, UnknownModelError
        For any bad input; nothing is written anywhere.
    """
    cdir = find_config_dir(config_dir)
    path = resolve_sweep_file(sweep, cdir)
    parsed = parse_overrides(overrides)
    group = [f"executor={o.value()}" for o in parsed
             if o.key_or_group == "executor" and isinstance(o.value(), str) and not o.is_sweep_override()]
    presets = sorted(f.stem for f in (cdir / "executor").glob("*.yaml"))
    for choice in group:
        if choice.split("=", 1)[1] not in presets:  # a preset name, never a path (executor=../sweep/x)
            raise ConfigError(f"{choice} is not an executor preset; executor presets are {', '.join(presets)} "
                              "(or set executor.kind/workers/address directly)", field="executor", value=choice)
    base = _compose_base(cdir, group)
    OmegaConf.set_struct(base, False)
    cfg = OmegaConf.merge(base, _load_sweep_yaml(path))
    if group:  # a preset named on the command line wins over the sweep file's inline executor
        cfg.executor = base.executor
    axis_overrides: dict[str, list[Any]] = {}
    for o in parsed:
        key = o.key_or_group
        if key == "executor" and not o.is_sweep_override():
            continue
        top = key.split(".")[0]
        if top not in SWEEP_KEYS:
            raise ConfigError(f"override {o.input_line!r} names unknown key {top!r}; allowed keys are "
                              f"{', '.join(SWEEP_KEYS)}", field=key, value=o.input_line)
        if o.is_delete():
            _delete_key(cfg, key)  # type: ignore[arg-type]
            continue
        if o.is_sweep_override():
            if top != "axes" or key.count(".") != 1:
                raise ConfigError(f"override {o.input_line!r} sweeps a value outside axes; only axes.NAME "
                                  "takes several values (a list or range(...))", field=key,
                                  value=o.input_line)
            _check_sweep_size(o, max_points_of(cfg))
            try:
                values = list(o.sweep_iterator())
            except Exception:
                raise ConfigError(f"override {o.input_line!r} is not a finite set of values; use "
                                  "range(start,stop,step), a comma list or choice(...)", field=key,
                                  value=o.input_line) from None
            axis_overrides[key.split(".", 1)[1]] = values
            continue
        OmegaConf.update(cfg, key, o.value(), merge=False, force_add=True)
    container = OmegaConf.to_container(cfg, resolve=True, throw_on_missing=False)
    assert isinstance(container, dict)
    axes_cfg = container.get("axes") or {}
    if not isinstance(axes_cfg, dict):
        raise ConfigError("axes must be a mapping of parameter name to values", field="axes", value=axes_cfg)
    for name, values in axis_overrides.items():
        axes_cfg[name] = values
    container["axes"] = axes_cfg
    if OmegaConf.is_missing(cfg.executor, "address") and container["executor"].get("kind") == "distributed":
        raise ConfigError("executor=distributed needs an address; add executor.address=tcp://HOST:PORT",
                          field="executor.address")
    return build_plan({str(k): v for k, v in container.items()}, source=str(path))


def max_points_of(cfg: Any) -> int:
    """Return the sweep's point limit (``limits.max_points``) before the plan is validated."""
    try:
        value = OmegaConf.select(cfg, "limits.max_points", default=None)
    except Exception:
        value = None
    if isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value) and value >= 1:
        return int(value)
    return DEFAULT_MAX_POINTS


def _check_sweep_size(override: Any, max_points: int) -> None:
    """Refuse a ``range(...)`` override with more values than the grid may hold, before expanding it."""
    from hydra.core.override_parser.types import RangeSweep

    value = override.value()
    if not isinstance(value, RangeSweep):
        return
    start, stop, step = value.start, value.stop, value.step if value.step is not None else 1
    if not (isinstance(start, (int, float)) and isinstance(stop, (int, float)) and isinstance(step, (int, float))
            and all(math.isfinite(v) for v in (start, stop, step)) and step != 0):
        raise ConfigError(f"override {override.input_line!r}: range(start, stop, step) needs finite numbers and a "
                          "non-zero step", field=override.key_or_group, value=override.input_line)
    count = max(0, math.ceil((stop - start) / step))
    if count > max_points:
        raise ConfigError(f"override {override.input_line!r} gives {count:.3g} values, above limits.max_points="
                          f"{max_points}; use a larger step", field=override.key_or_group,
                          value=override.input_line)


def _delete_key(cfg: DictConfig, key: str) -> None:
    parent_key, _, leaf = key.rpartition(".")
    node = OmegaConf.select(cfg, parent_key) if parent_key else cfg
    if not isinstance(node, DictConfig) or leaf not in node:
        raise ConfigError(f"override ~{key} deletes a key that is not there; check the spelling",
                          field=key)
    del node[leaf]


def build_plan(cfg: Mapping[str, Any], *, source: str = "<dict>") -> SweepPlan:
    """Validate a plain sweep mapping into a :class:`SweepPlan` (no hydra needed).

    Useful from Python: ``build_plan({"model": ..., "fixed": ..., "axes": ...})``.
    """
    cfg = dict(cfg)
    unknown = sorted(set(cfg) - set(SWEEP_KEYS))
    if unknown:
        raise ConfigError(f"sweep has unknown key(s) {', '.join(unknown)}; allowed keys are "
                          f"{', '.join(SWEEP_KEYS)}", field=unknown[0], value=unknown)
    name = cfg.get("name") or Path(source).stem
    if not isinstance(name, str) or not _NAME_RE.match(name):
        raise ConfigError(f"name={name!r} is not a valid sweep name; use letters, digits, '_', '-', '.'",
                          field="name", value=name)
    model_name = cfg.get("model")
    if model_name is None:
        raise ConfigError(f"{source} names no model; add model: NAME (see `sweepshell models`)",
                          field="model")
    model_cls = get_model(model_name)
    model = _make_checked_model(model_cls, cfg.get("settings") or {})
    settings = model.settings
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
    # the grid size comes from the axis forms, before any axis is expanded into values
    lengths = {pname: _axis_length(f"axes.{pname}", spec) for pname, spec in axes_in.items()}
    if math.prod(lengths.values()) > max_points:
        shape = " x ".join(str(n) for n in lengths.values())
        raise ConfigError(f"the grid has {math.prod(lengths.values())} points ({shape}), above "
                          f"limits.max_points={max_points}; use fewer axis values or raise limits.max_points",
                          field="axes", value=math.prod(lengths.values()))
    axes: list[Axis] = []
    for pname, spec in axes_in.items():
        param = model_cls.get_parameter(pname)
        axis = _make_axis(pname, spec)
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

    n_points = math.prod(len(a) for a in axes)
    executor = _make_executor(cfg.get("executor") or {})
    block = cfg.get("block") or {}
    if block.get("points") is not None:
        block_points = _positive_int(block["points"], "block.points")
    else:
        seconds = float(block.get("target_seconds", 2.0))
        if not seconds > 0:
            raise ConfigError(f"block.target_seconds={seconds} must be positive", field="block.target_seconds")
        block_points = int(min(1_000_000, max(16, seconds / max(model.estimated_cost(), 1e-9))))
        # enough blocks to keep every worker busy and the progress bar moving (the store keeps the chunking it
        # was created with, so a later run with another worker count still resumes it)
        workers = executor.workers or os.cpu_count() or 1
        block_points = max(16, min(block_points, math.ceil(n_points / (4 * workers))))
    reuse = cfg.get("reuse", True)
    if not isinstance(reuse, bool):
        raise ConfigError(f"reuse={reuse!r} must be true or false", field="reuse", value=reuse)
    refine = _make_refine(cfg.get("refine"), [a.name for a in axes])
    store = cfg.get("store") or {}
    if not isinstance(store, dict):
        raise ConfigError("store must be a mapping (store: {path: results/NAME.zarr})", field="store", value=store)
    store_path = store.get("path") or os.path.join("results", f"{name}.zarr")
    check_store_path(store_path)
    resolved = {
        "name": name,
        "model": model_name,
        "settings": settings,
        "fixed": {k: _plain(v) for k, v in fixed.items()},
        "axes": {a.name: [_plain(v) for v in a.values] for a in axes},
        "store": {"path": str(store_path)},
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
        point_seconds=float(model.estimated_cost()),
    )


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


def _make_checked_model(model_cls: type[SweepModel], settings: Any) -> SweepModel:
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


def _make_axis(name: str, spec: Any) -> Axis:
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


def _make_refine(spec: Any, axis_names: list[str]) -> dict[str, Any] | None:
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


def _make_executor(spec: Mapping[str, Any]) -> ExecutorSpec:
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

