"""Store metadata: every name of the store layout, and the only code that reads ``zarr.json``.

A store is one zarr (format 3) group laid out as xarray writes one, so ``xr.open_zarr(path)``
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
from sweepshell.store.location import AnyPath, ObjectPath, StorePath, as_path

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
    "consolidated_entries",
    "dimension_names",
    "extra_chunk_counts",
    "has_node",
    "is_store",
    "list_chunk_indices",
    "load_record",
    "node_size",
    "read_attrs",
    "read_node",
    "read_node_or_reason",
    "read_record",
    "reconsolidate",
    "refuse_constant",
    "regime_attrs",
    "salvage_attributes",
    "status_attrs",
    "try_read_attrs",
    "write_node",
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


def has_node(folder: AnyPath) -> bool:
    """Return whether ``folder`` holds a zarr group or array (a metadata document)."""
    return (as_path(folder) / META_FILE).is_file()


def read_node(folder: AnyPath) -> dict[str, Any]:
    """Return the metadata document of the zarr node at ``folder``.

    Raises
    ------
    OSError
        If it cannot be read.
    ValueError
        If it is not a JSON object.
    """
    data = json.loads((as_path(folder) / META_FILE).read_text())
    if not isinstance(data, dict):
        raise ValueError(f"{META_FILE} is not a JSON object")
    return data


def read_attrs(folder: AnyPath) -> dict[str, Any]:
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


def try_read_attrs(folder: AnyPath) -> dict[str, Any] | None:
    """Return the attributes of the zarr node at ``folder``, or ``None`` if there is none readable."""
    try:
        return read_attrs(folder)
    except (OSError, ValueError):
        return None


def is_store(folder: AnyPath) -> bool:
    """Return whether ``folder`` holds a sweepshell store (any schema version)."""
    attrs = try_read_attrs(folder) if has_node(folder) else None
    return attrs is not None and ATTR.schema in attrs


def dimension_names(store: AnyPath, variable: str = STATUS_VAR) -> list[str]:
    """Return the dimension names of a store variable (for the ledger: the axes in plan order).

    Raises
    ------
    OSError, ValueError
        If the variable's metadata cannot be read.
    """
    return [str(n) for n in read_node(as_path(store) / variable).get("dimension_names") or []]


def child_nodes(folder: AnyPath) -> list[StorePath]:
    """Return the sub-folders of ``folder`` that are zarr nodes, sorted by name."""
    loc = as_path(folder)
    if isinstance(loc, ObjectPath):  # one listing; a prefix is a node when it holds a metadata document
        return sorted(loc / k.split("/")[0] for k in loc.find() if k.count("/") == 1 and k.endswith("/" + META_FILE))
    return sorted(p for p in loc.iterdir() if p.is_dir() and has_node(p))


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

    ``Infinity`` and ``-Infinity`` read as floats (a fixed parameter whose range includes infinity);
    ``NaN`` is refused (canonical records write it as null).

    Raises
    ------
    TypeError, ValueError
        If it is not a JSON string.
    """
    return json.loads(text, parse_constant=_infinity_only)


def read_record(attrs: Mapping[str, Any], key: str, default: str | None = None) -> Any:
    """Return the decoded JSON record ``attrs[key]`` (``default`` text when absent; required if ``None``).

    Raises
    ------
    KeyError
        If the record is absent and there is no default.
    TypeError, ValueError
        If it is not a JSON string.
    """
    text = attrs[key] if default is None else attrs.get(key, default)
    if key == ATTR.axes:
        # axis values are finite by construction; a non-finite one is damage (and sizes work from it)
        return json.loads(text, parse_constant=refuse_constant)
    return load_record(text)


# --- consolidated metadata ---------------------------------------------------------------------------------------


def reconsolidate(path: AnyPath) -> None:
    """Rewrite the store's consolidated metadata after arrays were added or resized."""
    import zarr

    with warnings.catch_warnings():
        # the store relies on consolidated metadata (written at creation, see store/writer.py); adding or
        # resizing arrays makes it stale, so it is rewritten
        warnings.filterwarnings("ignore", message=".*[Cc]onsolidated metadata.*")
        # re-serialising the grid's existing arrays repeats zarr's warning about fixed-length string
        # coordinates (written at creation); it says nothing about the arrays added since
        warnings.filterwarnings("ignore", message=".*does not have a Zarr V3 specification.*")
        from sweepshell.store.location import zarr_store

        zarr.consolidate_metadata(zarr_store(path), zarr_format=3)


# --- damaged stores: reading what survives (see sweepshell.store.integrity) -------------------------------------


def read_node_or_reason(folder: AnyPath) -> tuple[Any, str | None]:
    """Return ``(metadata document, None)`` of the node at ``folder``, or ``(None, what is wrong)``.

    Never raises: a missing, unreadable or non-JSON document is described in a few words.
    """
    return _read_file_or_reason(as_path(folder) / META_FILE)


def _read_file_or_reason(file: StorePath) -> tuple[Any, str | None]:
    """Return ``(value, None)`` or ``(None, reason)`` for a JSON file."""
    try:
        text = file.read_text()
    except FileNotFoundError:
        return None, "is missing"
    except (OSError, UnicodeDecodeError) as exc:
        return None, f"cannot be read ({type(exc).__name__})"
    try:
        return json.loads(text, parse_constant=refuse_constant), None
    except ValueError as exc:
        return None, f"does not parse as JSON ({str(exc).splitlines()[0]})"


def _infinity_only(name: str) -> float:
    # fixed parameters may hold ±inf where their range includes it (json writes Infinity); NaN is never a value
    if name in ("Infinity", "-Infinity"):
        return float(name)
    return refuse_constant(name)


def refuse_constant(name: str) -> Any:
    # zarr writes NaN fill values as the string "NaN"; a bare NaN/Infinity token is not JSON
    raise ValueError(f"non-standard constant {name}")


def _salvage_attributes(text: str) -> dict[str, Any] | None:
    """Return the ``attributes`` object of a damaged (e.g. truncated) root ``zarr.json``, if it parses.

    zarr writes ``attributes`` first, so a file cut anywhere after them still yields them.
    """
    key = text.find('"attributes"')
    if key < 0:
        return None
    colon = text.find(":", key + len('"attributes"'))
    start = len(text) if colon < 0 else colon + 1
    while start < len(text) and text[start].isspace():
        start += 1
    try:
        value, _ = json.JSONDecoder().raw_decode(text, start)
    except ValueError:
        return None
    return value if isinstance(value, dict) else None


def salvage_attributes(folder: AnyPath) -> dict[str, Any] | None:
    """Return the attributes that still parse in a damaged (e.g. truncated) metadata document, if any."""
    try:
        return _salvage_attributes((as_path(folder) / META_FILE).read_text(errors="replace"))
    except OSError:
        return None


def node_size(folder: AnyPath) -> int:
    """Return the size in bytes of the node's metadata document (0 when absent)."""
    try:
        return (as_path(folder) / META_FILE).stat().st_size
    except OSError:
        return 0


def write_node(folder: AnyPath, value: Any) -> None:
    """Replace the node's metadata document atomically (``verify --repair`` rebuilding damaged metadata)."""
    loc = as_path(folder)
    if isinstance(loc, Path):
        loc.mkdir(exist_ok=True)
        _write_file(loc / META_FILE, value)
    else:  # one PUT replaces an object atomically
        (loc / META_FILE).write_text(json.dumps(value, indent=2))


def _write_file(file: Path, value: Any) -> None:
    tmp = file.with_name(file.name + f".tmp-{os.getpid()}")
    tmp.write_text(json.dumps(value, indent=2))
    os.replace(tmp, file)


def list_chunk_indices(array_dir: AnyPath) -> set[tuple[int, ...]] | None:
    """Return the chunk grid indices that have a file, by listing the folder (no decoding).

    Returns ``None`` when the array's chunk key encoding is not the default one (``c/i/j``
    or ``c.i.j``) or its metadata cannot be read: then presence cannot be judged by listing.
    """
    folder = as_path(array_dir)
    meta, reason = _read_file_or_reason(folder / "zarr.json")
    if reason is not None or not isinstance(meta, dict):
        return set() if not folder.exists() else None
    enc = meta.get("chunk_key_encoding") or {}
    if enc.get("name") != "default":
        return None
    sep = (enc.get("configuration") or {}).get("separator", "/")
    found: set[tuple[int, ...]] = set()
    if sep == "/" and isinstance(folder, Path):
        base = folder / "c"
        for dirpath, _, files in os.walk(base):
            rel = Path(dirpath).relative_to(base).parts
            for f in files:
                parts = (*rel, f)
                if all(p.isdigit() for p in parts):
                    found.add(tuple(int(p) for p in parts))
        return found
    # an object store lists the array's prefix in one paginated request
    for f in folder.find() if isinstance(folder, ObjectPath) else os.listdir(folder):
        pieces = f.split(sep)
        if pieces[0] == "c" and len(pieces) > 1 and all(p.isdigit() for p in pieces[1:]):
            found.add(tuple(int(p) for p in pieces[1:]))
    return found


def extra_chunk_counts(array_dir: AnyPath, n_axes: int) -> tuple[int, ...]:
    meta, _ = _read_file_or_reason(as_path(array_dir) / "zarr.json")
    try:
        shape = meta["shape"][n_axes:]
        chunks = meta["chunk_grid"]["configuration"]["chunk_shape"][n_axes:]
        return tuple(math.ceil(s / c) for s, c in zip(shape, chunks, strict=True))
    except (TypeError, KeyError, ZeroDivisionError, ValueError):
        return ()


def consolidated_entries(root_meta: Mapping[str, Any]) -> dict[str, Any]:
    """Return the consolidated metadata entries (node path → document) of a parsed root document."""
    consolidated = root_meta.get("consolidated_metadata")
    if isinstance(consolidated, dict) and isinstance(consolidated.get("metadata"), dict):
        return dict(consolidated["metadata"])
    return {}
