"""Model registry: configs choose models by registered name only.

The registry maps a name to a module and class inside this package. Nothing named in a
config or read from a store is ever imported: an unknown name is an error.
"""

from __future__ import annotations

import importlib
import importlib.util
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
    "FINAL_STATUSES",
    "TRUSTED_STATUSES",
    "BatchResult",
    "OutputSpec",
    "ParameterSpec",
    "Status",
    "SweepModel",
    "get_model",
    "list_models",
    "make_model",
]

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
    found = {}
    for name, (module, cls) in _REGISTRY.items():
        if importlib.util.find_spec(module) is not None:
            found[name] = (module, cls)
    return found


def list_models() -> list[str]:
    """Return the names of the registered models that are installed, sorted."""
    return sorted(_available())


def get_model(name: str) -> type[SweepModel]:
    """Return the model class registered as ``name``.

    Raises
    ------
    UnknownModelError
        If no model is registered under that name.
    """
    entry = _available().get(name) if isinstance(name, str) else None
    if entry is None:
        raise UnknownModelError(
            f"model={name!r} is not a registered model; use one of {', '.join(list_models())}",
            field="model", value=name, allowed=", ".join(list_models()))
    module = importlib.import_module(entry[0])
    cls: type[SweepModel] = getattr(module, entry[1])
    return cls


def make_model(name: str, settings: dict[str, Any] | None = None) -> SweepModel:
    """Return an instance of model ``name`` built with the given numerical settings."""
    return get_model(name)(**(settings or {}))
