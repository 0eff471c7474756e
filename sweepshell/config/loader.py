"""From a sweep file and command-line overrides to a validated, frozen :class:`SweepPlan`.

This is the only module that touches hydra. It uses hydra's compose API (no run
directories, no logging set-up, no multirun launcher) for ``configs/config.yaml`` and the
executor presets, and hydra's override parser for the command line, including sweep forms
on axes (``axes.shell_parameter=range(3,12,0.5)``, ``axes.poisson_ratio=0.2,0.3,0.4``).

Nothing in a config is ever imported or executed: the model is looked up by registered name
and every value is plain data.
"""

from __future__ import annotations

import math
import os
import re
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import yaml
from omegaconf import DictConfig, OmegaConf

from sweepshell.config.plan_builder import DEFAULT_MAX_POINTS, SWEEP_KEYS, build_plan
from sweepshell.errors import ConfigError
from sweepshell.plan import SweepPlan

__all__ = [
    "PACKAGED_CONFIGS",
    "build_plan",
    "find_config_dir",
    "is_packaged_config_dir",
    "load_plan",
    "parse_overrides",
    "resolve_sweep_file",
]



#: the packaged copy of ``configs/`` (hydra search path ``pkg://sweepshell._configs``)
PACKAGED_CONFIGS = "sweepshell._configs"


def find_config_dir(explicit: str | os.PathLike[str] | None = None) -> Path:
    """Return the ``configs/`` folder: the explicit one, ``$SWEEPSHELL_CONFIG_DIR``, ``./configs`` or the packaged one.

    The packaged folder (:data:`PACKAGED_CONFIGS`) ships inside the wheel, so an installed sweepshell runs its
    demo sweeps from any folder; :func:`is_packaged_config_dir` tells it apart.
    """
    candidates = []
    if explicit is not None:
        candidates.append(Path(explicit))
    env = os.environ.get("SWEEPSHELL_CONFIG_DIR")
    if env:
        candidates.append(Path(env))
    candidates.append(Path.cwd() / "configs")
    for c in candidates:
        if (c / "config.yaml").is_file():
            return c.resolve()
    packaged = _packaged_config_dir()
    if explicit is None and packaged is not None:
        return packaged
    raise ConfigError(
        "no configs/config.yaml found (looked in " + ", ".join(str(c) for c in candidates)
        + "); run from the project folder or pass --config-dir", field="config_dir")


def _packaged_config_dir() -> Path | None:
    import importlib.resources

    try:
        root = Path(str(importlib.resources.files(PACKAGED_CONFIGS)))
    except (ModuleNotFoundError, TypeError):
        return None
    return root if (root / "config.yaml").is_file() else None


def is_packaged_config_dir(config_dir: Path) -> bool:
    """Return whether ``config_dir`` is the packaged copy of ``configs/`` (composed through ``pkg://``)."""
    packaged = _packaged_config_dir()
    return packaged is not None and packaged == config_dir


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
    from hydra import compose, initialize_config_dir, initialize_config_module
    from hydra.core.global_hydra import GlobalHydra
    from hydra.errors import HydraException
    from omegaconf.errors import OmegaConfBaseException

    GlobalHydra.instance().clear()
    packaged = is_packaged_config_dir(config_dir)
    try:
        with (initialize_config_module(PACKAGED_CONFIGS, version_base=None) if packaged
              else initialize_config_dir(config_dir=str(config_dir), version_base=None)):
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
