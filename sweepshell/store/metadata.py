"""Store metadata: every name of the store layout, and the only code that reads ``zarr.json``.

A store is one zarr (format 3) group written through xarray, so ``xr.open_zarr(path)``
works without sweepshell. Dimensions are the sweep axes in plan order, then any extra
output dimensions of the model. Group attributes hold plain JSON types or JSON strings
(the settings, fixed-parameter and axes records, written by :func:`canonical_json`).

Everything else in sweepshell reads node metadata, attributes and records through the
functions here (fast, without opening zarr), and rewrites consolidated metadata through
:func:`reconsolidate`.
"""

from __future__ import annotations

import json
import math
import os
import warnings
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from sweepshell.models.base import Status

__all__ = [
    "ATTR",
    "META_FILE",
    "POINTS_GROUP",
    "REGIME_VAR",
    "SCHEMA_VERSION",
    "STATUS_FLAG_MEANINGS",
    "STATUS_FLAG_VALUES",
    "STATUS_VAR",
    "TEMP_SUFFIX",
    "canonical_json",
    "child_nodes",
    "dimension_names",
    "has_node",
    "is_store",
    "load_record",
    "read_attrs",
    "read_node",
    "read_record",
    "reconsolidate",
    "regime_attrs",
    "status_attrs",
    "try_read_attrs",
]

#: the metadata document of every zarr (format 3) group and array folder
META_FILE = "zarr.json"

#: the group of off-grid points inside a store (see :mod:`sweepshell.store.points`)
POINTS_GROUP = "points"

#: version of the layout below; readers refuse stores with a version they do not know
SCHEMA_VERSION = 1

STATUS_VAR = "status"
REGIME_VAR = "regime"

#: suffix of the folder a template is built in before it is renamed into place
TEMP_SUFFIX = ".sweepshell-tmp"


class ATTR:
    """Names of the group attributes (all values are plain JSON types or JSON strings)."""

    tool = "sweepshell_version"
    schema = "sweepshell_schema"
    model = "model"
    model_version = "model_version"
    model_package = "model_package"                # distribution providing the model (sweepshell for built-ins)
    model_package_version = "model_package_version"
    settings = "model_settings_json"
    fixed = "fixed_parameters_json"
    axes = "axes_json"
    sweep_yaml = "sweep_yaml"
    sweep_name = "sweep_name"
    created = "created"
    caution = "caution"
    block_shape = "block_shape"
    regimes = "regimes"
    conventions = "Conventions"


STATUS_FLAG_VALUES = [int(s) for s in Status]
STATUS_FLAG_MEANINGS = " ".join(s.name for s in Status)


def status_attrs() -> dict[str, object]:
    """Return the CF attributes of the ledger variable."""
    return {
        "long_name": "point status (ledger)",
        "flag_values": STATUS_FLAG_VALUES,
        "flag_meanings": STATUS_FLAG_MEANINGS,
        "comment": "only ok and no_instability carry trustworthy values; 0 pending = not computed yet",
    }


def regime_attrs(regimes: tuple[str, ...]) -> dict[str, object]:
    """Return the CF attributes of the regime variable for a model's regime labels."""
    return {
        "long_name": "regime (behaviour at the point)",
        "flag_values": [-1, *range(len(regimes))],
        "flag_meanings": " ".join(("none", *regimes)),
        "comment": "-1 none: the point has no trustworthy status",
    }


# --- reading node metadata --------------------------------------------------------------------------------------


def has_node(folder: str | os.PathLike[str]) -> bool:
    """Return whether ``folder`` holds a zarr group or array (a metadata document)."""
    return (Path(folder) / META_FILE).is_file()


def read_node(folder: str | os.PathLike[str]) -> dict[str, Any]:
    """Return the metadata document of the zarr node at ``folder``.

    Raises
    ------
    OSError
        If it cannot be read.
    ValueError
        If it is not a JSON object.
    """
    data = json.loads((Path(folder) / META_FILE).read_text())
    if not isinstance(data, dict):
        raise ValueError(f"{META_FILE} is not a JSON object")
    return data


def read_attrs(folder: str | os.PathLike[str]) -> dict[str, Any]:
    """Return the attributes of the zarr node at ``folder`` (``{}`` when it has none).

    Raises
    ------
    OSError
        If the metadata cannot be read.
    ValueError
        If it is not JSON, or its attributes are not an object.
    """
    attrs = read_node(folder).get("attributes", {})
    if not isinstance(attrs, dict):
        raise ValueError("the attributes are not a JSON object")
    return attrs


def try_read_attrs(folder: str | os.PathLike[str]) -> dict[str, Any] | None:
    """Return the attributes of the zarr node at ``folder``, or ``None`` if there is none readable."""
    try:
        return read_attrs(folder)
    except (OSError, ValueError):
        return None


def is_store(folder: str | os.PathLike[str]) -> bool:
    """Return whether ``folder`` holds a sweepshell store (any schema version)."""
    attrs = try_read_attrs(folder) if has_node(folder) else None
    return attrs is not None and ATTR.schema in attrs


def dimension_names(store: str | os.PathLike[str], variable: str = STATUS_VAR) -> list[str]:
    """Return the dimension names of a store variable (for the ledger: the axes in plan order).

    Raises
    ------
    OSError, ValueError
        If the variable's metadata cannot be read.
    """
    return [str(n) for n in read_node(Path(store) / variable).get("dimension_names") or []]


def child_nodes(folder: str | os.PathLike[str]) -> list[Path]:
    """Return the sub-folders of ``folder`` that are zarr nodes, sorted by name."""
    return sorted(p for p in Path(folder).iterdir() if p.is_dir() and has_node(p))


# --- the JSON records inside the attributes ----------------------------------------------------------------------


def canonical_json(obj: Any) -> str:
    """Return the JSON record of settings, fixed parameters or axes as stored (sorted keys, NaN as null)."""
    def fix(v: Any) -> Any:
        if isinstance(v, float) and math.isnan(v):
            return None
        if isinstance(v, dict):
            return {str(k): fix(x) for k, x in v.items()}
        if isinstance(v, (list, tuple)):
            return [fix(x) for x in v]
        if isinstance(v, np.generic):
            return v.item()
        return v

    return json.dumps(fix(obj), sort_keys=True)


def load_record(text: Any) -> Any:
    """Return the value of one JSON record (an attribute string written by :func:`canonical_json`).

    Raises
    ------
    TypeError, ValueError
        If it is not a JSON string.
    """
    return json.loads(text)


def read_record(attrs: Mapping[str, Any], key: str, default: str | None = None) -> Any:
    """Return the decoded JSON record ``attrs[key]`` (``default`` text when absent; required if ``None``).

    Raises
    ------
    KeyError
        If the record is absent and there is no default.
    TypeError, ValueError
        If it is not a JSON string.
    """
    return load_record(attrs[key] if default is None else attrs.get(key, default))


# --- consolidated metadata ---------------------------------------------------------------------------------------


def reconsolidate(path: str | os.PathLike[str]) -> None:
    """Rewrite the store's consolidated metadata after arrays were added or resized."""
    import zarr

    with warnings.catch_warnings():
        # the store relies on consolidated metadata (written at creation, see store/writer.py); adding or
        # resizing arrays makes it stale, so it is rewritten
        warnings.filterwarnings("ignore", message=".*[Cc]onsolidated metadata.*")
        # re-serialising the grid's existing arrays repeats zarr's warning about fixed-length string
        # coordinates (written at creation); it says nothing about the arrays added since
        warnings.filterwarnings("ignore", message=".*does not have a Zarr V3 specification.*")
        zarr.consolidate_metadata(str(path), zarr_format=3)
