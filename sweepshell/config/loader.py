"""From a sweep file and command-line overrides to a validated, frozen :class:`SweepPlan`.

This is the only module that touches hydra. It uses hydra's compose API (no run
directories, no logging set-up, no multirun launcher) for ``configs/config.yaml`` and the
executor presets, and hydra's override parser for the command line, including sweep forms
on axes (``axes.shell_parameter=range(3,12,0.5)``, ``axes.poisson_ratio=0.2,0.3,0.4``).

Nothing in a config is ever imported or executed: the model is looked up by registered name
and every value is plain data.
"""

from __future__ import annotations

import os
import re
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import yaml
from omegaconf import DictConfig, OmegaConf

from sweepshell.config.plan_builder import SWEEP_KEYS, build_plan
from sweepshell.errors import ConfigError
from sweepshell.plan import SweepPlan

__all__ = ["build_plan", "find_config_dir", "load_plan", "parse_overrides", "resolve_sweep_file"]

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


class _SweepYamlLoader(yaml.SafeLoader):
    """Safe YAML that also reads ``70.0e9`` and ``1e-3`` as numbers (YAML 1.1 wants a dot and a sign)."""


_SweepYamlLoader.add_implicit_resolver(
    "tag:yaml.org,2002:float",
    re.compile(r"^[-+]?(?:[0-9][0-9_]*(?:\.[0-9_]*)?|\.[0-9_]+)[eE][-+]?[0-9]+$"),
    list("-+0123456789."))


def _load_sweep_yaml(path: Path) -> DictConfig:
    try:
        text = path.read_text()
        data = yaml.load(text, Loader=_SweepYamlLoader)  # a SafeLoader subclass: builds plain data only
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
    return OmegaConf.create(data)


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


def _delete_key(cfg: DictConfig, key: str) -> None:
    parent_key, _, leaf = key.rpartition(".")
    node = OmegaConf.select(cfg, parent_key) if parent_key else cfg
    if not isinstance(node, DictConfig) or leaf not in node:
        raise ConfigError(f"override ~{key} deletes a key that is not there; check the spelling",
                          field=key)
    del node[leaf]
