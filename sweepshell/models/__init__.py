"""Model registry: configs choose models by registered name only.

Two sources register models: the built-in table below (modules of this package) and the
entry points of installed distributions in the group ``sweepshell.models`` (plug-ins: the
entry point's name is the model name, its value a :class:`SweepModel` subclass). Nothing
named in a config or read from a store is ever imported unless it is one of these: an
unknown name is an error. A built-in name wins over a plug-in of the same name.
"""

from __future__ import annotations

import importlib
import importlib.machinery
import importlib.metadata
import importlib.util
import logging
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from sweepshell.errors import UnknownModelError
from sweepshell.models.base import (
    FINAL_STATUSES,
    TRUSTED_STATUSES,
    BatchResult,
    OutputSpec,
    ParameterSpec,
    Status,
    SweepModel,
)

__all__ = [
    "ENTRY_POINT_GROUP",
    "FINAL_STATUSES",
    "TRUSTED_STATUSES",
    "BatchResult",
    "ModelOrigin",
    "OutputSpec",
    "ParameterSpec",
    "Status",
    "SweepModel",
    "find_plugin_models",
    "get_model",
    "get_model_origin",
    "list_models",
    "make_model",
]

log = logging.getLogger(__name__)

#: entry-point group through which installed distributions register models
ENTRY_POINT_GROUP = "sweepshell.models"

# name -> (module, class); a fixed table of our own code, never extended from input
_REGISTRY: dict[str, tuple[str, str]] = {
    "shallow_cap": ("sweepshell.models.shallow_cap.model", "ShallowCapModel"),
    "cap_postbuckling": ("sweepshell.models.cap_postbuckling.model", "CapPostbucklingModel"),
    "foundation_strip": ("sweepshell.models.foundation_strip.model", "FoundationStripModel"),
    "foundation_sheet": ("sweepshell.models.foundation_sheet.model", "FoundationSheetModel"),
    "curved_strip": ("sweepshell.models.curved_strip.model", "CurvedStripModel"),
    "winkler_column": ("sweepshell.models.winkler_column.model", "WinklerColumnModel"),
}


def _available() -> dict[str, tuple[str, str]]:
    """The built-in models whose modules are present, found without importing any model package.

    ``find_spec("a.b.c")`` would import the package ``a.b`` (a model's ``__init__`` may load its numba
    kernels), so the package is located first and the module looked up in its folder.
    """
    found = {}
    for name, (module, cls) in _REGISTRY.items():
        package, _, leaf = module.rpartition(".")
        spec = importlib.util.find_spec(package)
        locations = spec.submodule_search_locations if spec is not None else None
        if locations is not None and importlib.machinery.PathFinder.find_spec(leaf, list(locations)) is not None:
            found[name] = (module, cls)
    return found


@dataclass(frozen=True)
class ModelOrigin:
    """Where a registered model comes from.

    Attributes
    ----------
    name
        The model's registry name.
    distribution
        The installed distribution providing it: ``sweepshell`` for built-in models, the
        plug-in's distribution name otherwise.
    version
        That distribution's version.
    builtin
        Whether the model is one of sweepshell's own.
    """

    name: str
    distribution: str
    version: str
    builtin: bool

    @property
    def label(self) -> str:
        """``built-in`` or ``DISTRIBUTION VERSION``, as ``sweepshell models`` shows it."""
        return "built-in" if self.builtin else f"{self.distribution} {self.version}"


def find_plugin_models() -> dict[str, importlib.metadata.EntryPoint]:
    """Return the plug-in models of installed distributions: model name → entry point (nothing is imported).

    Names taken by a built-in model, and the second of two plug-ins claiming one name, are
    skipped with a warning.
    """
    found: dict[str, importlib.metadata.EntryPoint] = {}
    eps = sorted(importlib.metadata.entry_points(group=ENTRY_POINT_GROUP),
                 key=lambda ep: (ep.name, _dist_name(ep)))
    for ep in eps:
        if ep.name in _REGISTRY:
            log.warning("plug-in %s registers model %r, a built-in name; ignored", _dist_name(ep), ep.name)
        elif ep.name in found:
            log.warning("plug-ins %s and %s both register model %r; %s is used", _dist_name(found[ep.name]),
                        _dist_name(ep), ep.name, _dist_name(found[ep.name]))
        else:
            found[ep.name] = ep
    return found


def _dist_name(ep: importlib.metadata.EntryPoint) -> str:
    return ep.dist.name if ep.dist is not None else "(unknown distribution)"


def _dist_version(ep: importlib.metadata.EntryPoint) -> str:
    return ep.dist.version if ep.dist is not None else "unknown"


def list_models() -> list[str]:
    """Return the names of the registered models that are installed (built-in and plug-in), sorted."""
    return sorted({*_available(), *find_plugin_models()})


def get_model(name: str) -> type[SweepModel]:
    """Return the model class registered as ``name`` (a built-in model or a plug-in's entry point).

    Raises
    ------
    UnknownModelError
        If no model is registered under that name, or a plug-in's entry point does not
        lead to a :class:`SweepModel` subclass of that name.
    """
    entry = _available().get(name) if isinstance(name, str) else None
    if entry is not None:
        if entry[0] not in sys.modules:
            from sweepshell.models.compiled_cache import ensure_compiled_cache

            ensure_compiled_cache(Path(__file__).parent / entry[0].split(".")[2])  # before numba defines kernels
        module = importlib.import_module(entry[0])
        cls: type[SweepModel] = getattr(module, entry[1])
        return cls
    plugin = find_plugin_models().get(name) if isinstance(name, str) else None
    if plugin is None:
        raise UnknownModelError(
            f"model={name!r} is not a registered model; use one of {', '.join(list_models())} "
            "(a plug-in model needs its package installed)",
            field="model", value=name, allowed=", ".join(list_models()))
    return _load_plugin(name, plugin)


def _load_plugin(name: str, ep: importlib.metadata.EntryPoint) -> type[SweepModel]:
    where = f"plug-in {_dist_name(ep)} {_dist_version(ep)} (entry point {ep.name} = {ep.value})"
    try:
        cls = ep.load()
    except Exception as exc:  # a broken plug-in must not crash the caller with a traceback
        raise UnknownModelError(
            f"model {name!r} from {where} could not be imported ({type(exc).__name__}: {exc}); "
            f"reinstall or fix {_dist_name(ep)}", field="model", value=name) from None
    if not (isinstance(cls, type) and issubclass(cls, SweepModel)):
        raise UnknownModelError(f"{where} is not a SweepModel subclass; its package must point the entry point "
                                "at the model class", field="model", value=name)
    if getattr(cls, "name", None) != name:
        raise UnknownModelError(f"{where} leads to a model named {getattr(cls, 'name', None)!r}, not {name!r}; "
                                "the entry point's name must equal the model's name", field="model", value=name)
    return cls


def get_model_origin(name: str) -> ModelOrigin:
    """Return where model ``name`` comes from (without importing it).

    Raises
    ------
    UnknownModelError
        If no model is registered under that name.
    """
    from sweepshell.about import __version__

    if name in _available():
        return ModelOrigin(name=name, distribution="sweepshell", version=__version__, builtin=True)
    plugin = find_plugin_models().get(name)
    if plugin is None:
        get_model(name)  # raises the usual error
    assert plugin is not None
    return ModelOrigin(name=name, distribution=_dist_name(plugin), version=_dist_version(plugin), builtin=False)


def make_model(name: str, settings: dict[str, Any] | None = None) -> SweepModel:
    """Return an instance of model ``name`` built with the given numerical settings."""
    return get_model(name)(**(settings or {}))
