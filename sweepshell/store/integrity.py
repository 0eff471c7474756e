"""Store integrity: metadata that agrees with itself (and, in chunk_checks.py, every chunk a final block needs).

Two promises make a store trustworthy, and both are checked without reading values:

1. **Metadata.** The root ``zarr.json`` parses and carries the store's attributes; every
   array (each declared model output, ``regime``, ``status``, the axis coordinates) has its
   own ``zarr.json`` that parses, agrees with its copy in the consolidated metadata (which
   ``xr.open_zarr`` reads) and has the data type the layout and the model declare. A
   disagreement is repaired from whichever copy has the declared data type; a lost array is
   re-created (empty) from its consolidated copy; a truncated root keeps its attributes when
   they still parse (they are written first) and its consolidated copy is rebuilt from the
   arrays. Provenance lost with the root cannot be rebuilt from the arrays.
2. **Chunks** (:mod:`sweepshell.store.chunk_checks`): every block whose ledger says final and
   that holds a trusted point has a chunk file of every output and of ``regime``.

Nothing read here is imported or executed: metadata is parsed as JSON and compared as data.
"""

from __future__ import annotations

import json
import math
import os
import re
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from sweepshell.errors import ConfigError, StoreDamagedError
from sweepshell.models.base import TRUSTED_STATUSES
from sweepshell.store import metadata
from sweepshell.store.metadata import ATTR

__all__ = [
    "MetadataProblem",
    "check_model_limits",
    "check_record_shapes",
    "check_store_metadata",
    "check_store_path",
    "declared_outputs",
    "read_root_metadata",
    "repair_metadata",
    "repair_remedy",
    "scan_metadata",
]

#: largest root zarr.json read (attributes and consolidated metadata of a store take kilobytes)
MAX_ROOT_METADATA_BYTES = 16_000_000
#: most values one point may hold across a model's extra output dimensions
MAX_VALUES_PER_POINT = 1_000_000
#: most seconds a model may claim to need per point
MAX_SECONDS_PER_POINT = 600.0

#: fields of an array's metadata that must agree between its own file and the consolidated copy
_COMPARED = ("data_type", "shape", "chunk_grid", "chunk_key_encoding", "codecs", "fill_value", "dimension_names")
_TRUSTED = np.array(sorted(int(s) for s in TRUSTED_STATUSES))


@dataclass(frozen=True)
class MetadataProblem:
    """One metadata inconsistency.

    Attributes
    ----------
    variable
        The array concerned (``None`` for the root group).
    message
        One line saying what is wrong.
    repairable
        Whether :func:`repair_metadata` can rebuild it from the other copy or from the arrays.
    """

    variable: str | None
    message: str
    repairable: bool


_URL_RE = re.compile(r"^[A-Za-z][A-Za-z0-9+.-]+:")
_SYSTEM_DIRS = ("/proc", "/sys", "/dev")


def check_store_path(store_path: Any, what: str = "store.path") -> None:
    """Refuse store paths that cannot hold a store: URLs, system folders, paths through or onto a file.

    Stores live in local (or shared, mounted) folders; object-store URLs are not supported yet, and
    refusing them here keeps a URL from becoming a local folder named ``s3:``.
    """
    if not isinstance(store_path, str) or not store_path.strip():
        raise ConfigError(f"{what}={store_path!r} must be a folder path such as results/NAME.zarr",
                          field=what, value=store_path)
    if _URL_RE.match(store_path):
        raise ConfigError(f"{what}={store_path!r} is a URL; object stores are not supported yet, give a local "
                          "or mounted folder such as results/NAME.zarr", field=what, value=store_path)
    resolved = Path(store_path).resolve()
    for system in _SYSTEM_DIRS:
        if resolved == Path(system) or Path(system) in resolved.parents:
            raise ConfigError(f"{what}={store_path!r} is under {system}, a system folder; give a folder of "
                              "your own such as results/NAME.zarr", field=what, value=store_path)
    if resolved.exists() and not resolved.is_dir():
        raise ConfigError(f"{what}={store_path!r} is a file; choose another path (a store is a folder)",
                          field=what, value=store_path)
    for parent in resolved.parents:
        if parent.exists():
            if not parent.is_dir():
                raise ConfigError(f"{what}={store_path!r} lies inside the file {parent}; give a folder path",
                                  field=what, value=store_path)
            break


def repair_remedy(path: str | os.PathLike[str], repairable: bool = True) -> str:
    """Return the fix to name for a damaged store."""
    if repairable:
        return f"run `sweepshell verify --repair {path}`, then run the sweep again"
    return (f"restore {path} from a backup, or run the sweep again into a new store "
            "(store.path=...)")


def read_root_metadata(path: str | os.PathLike[str]) -> dict[str, Any]:
    """Return the parsed root ``zarr.json`` of a store.

    Raises
    ------
    StoreDamagedError
        If the file exists but does not parse as a JSON object (a truncated or overwritten root).
    FileNotFoundError
        If there is no root ``zarr.json`` (the caller decides what that means).
    """
    if not metadata.has_node(path):
        raise FileNotFoundError(str(Path(path) / metadata.META_FILE))
    size = metadata.node_size(path)
    if size > MAX_ROOT_METADATA_BYTES:
        raise StoreDamagedError(f"store {str(path)!r}: its root metadata zarr.json is {size} bytes, above "
                                f"{MAX_ROOT_METADATA_BYTES} (a store's records take kilobytes); "
                                + repair_remedy(path, False), field="store", value=str(path))
    meta, reason = metadata.read_node_or_reason(path)
    if reason is None and not isinstance(meta, dict):
        reason = "is not a JSON object"
    if reason is not None:
        salvaged = metadata.salvage_attributes(path)
        ok = salvaged is not None and ATTR.schema in salvaged
        raise StoreDamagedError(f"store {str(path)!r}: its root metadata zarr.json {reason}; "
                                + repair_remedy(path, ok), field="store", value=str(path))
    assert isinstance(meta, dict)
    return meta


def declared_outputs(attrs: Mapping[str, Any]) -> dict[str, Any] | None:
    """Return ``{output name: OutputSpec}`` of the store's model, or ``None`` if it cannot be known.

    The model is looked up by its registered name only (nothing from the store is imported);
    settings that the model no longer accepts leave the outputs unknown.
    """
    from sweepshell.models import list_models, make_model

    name = attrs.get(ATTR.model)
    if not isinstance(name, str) or name not in list_models():
        return None
    try:
        settings = metadata.read_record(attrs, ATTR.settings, "{}")
        model = make_model(name, settings if isinstance(settings, dict) else {})
        return {out.name: out for out in model.outputs}
    except Exception:  # a store with settings this version rejects: its outputs are unknown, not fatal
        return None


def _expected_dtypes(attrs: Mapping[str, Any]) -> dict[str, str]:
    expected = {metadata.STATUS_VAR: "uint8", metadata.REGIME_VAR: "int8"}
    outputs = declared_outputs(attrs) or {}
    for name, spec in outputs.items():
        expected[name] = np.dtype(spec.dtype).name
    return expected


def scan_metadata(path: str | os.PathLike[str], root_meta: Mapping[str, Any]) -> list[MetadataProblem]:
    """Return every metadata inconsistency of a store whose root metadata parsed.

    Reads each array's ``zarr.json`` (a few small files) and compares it with the consolidated
    copy and the declared data types.
    """
    root = Path(path)
    attrs = root_meta.get("attributes") or {}
    consolidated = root_meta.get("consolidated_metadata")
    entries: dict[str, Any] = {}
    if isinstance(consolidated, dict) and isinstance(consolidated.get("metadata"), dict):
        entries = consolidated["metadata"]
    problems: list[MetadataProblem] = []
    expected = _expected_dtypes(attrs)
    axes = _json_attr(attrs, ATTR.axes)
    names = set(expected) | {n for n, e in entries.items()
                             if isinstance(e, dict) and e.get("node_type") == "array" and "/" not in n}
    names |= set(axes or {})
    for name in sorted(names):
        problems += _scan_array(root, name, entries.get(name), expected.get(name))
    return problems


def _json_attr(attrs: Mapping[str, Any], key: str) -> dict[str, Any] | None:
    try:
        value = metadata.read_record(attrs, key)
    except (KeyError, TypeError, ValueError):
        return None
    return value if isinstance(value, dict) else None


def _scan_array(root: Path, name: str, copy: Any, dtype: str | None) -> list[MetadataProblem]:
    own, reason = metadata.read_node_or_reason(root / name)
    if reason is None and not (isinstance(own, dict) and own.get("node_type") == "array"):
        reason = "is not the metadata of an array"
    copy_ok = isinstance(copy, dict) and copy.get("node_type") == "array"
    if reason is not None:
        if reason == "is missing" and not (root / name).exists():
            what = f"array {name} is missing (its folder was removed)"
        else:
            what = f"{name}/zarr.json {reason}"
        good_copy = copy_ok and (dtype is None or copy.get("data_type") == dtype)
        return [MetadataProblem(name, what + ("" if good_copy else " and it has no usable consolidated copy"),
                                good_copy)]
    assert isinstance(own, dict)
    own_right = dtype is None or own.get("data_type") == dtype
    if not copy_ok:
        return [MetadataProblem(name, f"the consolidated metadata has no usable entry for array {name}", own_right)]
    differ = [k for k in _COMPARED if own.get(k) != copy.get(k)]
    if differ:
        copy_right = dtype is None or copy.get("data_type") == dtype
        return [MetadataProblem(name, f"array {name}: {', '.join(differ)} in {name}/zarr.json "
                                      f"({_short(own, differ[0])}) disagree(s) with the consolidated metadata "
                                      f"({_short(copy, differ[0])})", own_right or copy_right)]
    if not own_right:
        return [MetadataProblem(name, f"array {name} has data type {own.get('data_type')!r}, the store's model "
                                      f"declares {dtype!r}", False)]
    return []


def _short(meta: Mapping[str, Any], key: str) -> str:
    text = json.dumps(meta.get(key))
    return text if len(text) <= 40 else text[:37] + "..."


def check_store_metadata(path: str | os.PathLike[str], root_meta: Mapping[str, Any] | None = None) -> None:
    """Raise :class:`StoreDamagedError` naming the first metadata problem and its remedy.

    Cheap (a few small JSON files); every command that opens a store calls it, so a damaged
    store is one line, never a decoding traceback or silently misread numbers.
    """
    meta = root_meta if root_meta is not None else read_root_metadata(path)
    problems = scan_metadata(path, meta)
    if not problems:
        problems = check_record_shapes(path, meta)
    if problems:
        first = problems[0]
        more = f" (and {len(problems) - 1} more)" if len(problems) > 1 else ""
        raise StoreDamagedError(f"store {str(path)!r} is damaged: {first.message}{more}; "
                                + repair_remedy(path, all(p.repairable for p in problems)),
                                field="store", value=str(path))


def check_record_shapes(path: str | os.PathLike[str], root_meta: Mapping[str, Any]) -> list[MetadataProblem]:
    """Return problems of the recorded axes and block shape against the ledger array's own metadata.

    Commands size their work from these records (refine, merge, run), so a record that claims
    more values than the arrays hold, a block of zero points or a non-standard number
    (``Infinity``) is refused before anything is allocated.
    """
    attrs = root_meta.get("attributes") or {}
    status_meta, _ = metadata.read_node_or_reason(Path(path) / metadata.STATUS_VAR)
    if not isinstance(status_meta, dict):
        return []  # reported by the metadata scan
    dims = [str(d) for d in status_meta.get("dimension_names") or []]
    shape = status_meta.get("shape") or []
    try:
        chunks = list(status_meta["chunk_grid"]["configuration"]["chunk_shape"])
    except (KeyError, TypeError):
        chunks = []
    problems = []
    try:
        axes = metadata.read_record(attrs, ATTR.axes, "")
    except (TypeError, ValueError) as exc:
        return [MetadataProblem(None, f"attribute {ATTR.axes} does not parse ({str(exc).splitlines()[0]})", False)]
    if not isinstance(axes, dict) or sorted(axes) != sorted(dims) or any(
            not isinstance(axes[d], list) or len(axes[d]) != n for d, n in zip(dims, shape, strict=False)):
        claimed = {k: len(v) if isinstance(v, list) else v for k, v in axes.items()} if isinstance(axes, dict) else axes
        problems.append(MetadataProblem(None, f"attribute {ATTR.axes} ({_clip(claimed)}) does not match the ledger's "
                                              f"axes {dict(zip(dims, shape, strict=False))}", False))
    block = attrs.get(ATTR.block_shape)
    if not (isinstance(block, list) and len(block) == len(dims) and all(
            isinstance(b, int) and not isinstance(b, bool) and b >= 1 for b in block) and block == chunks):
        problems.append(MetadataProblem(None, f"attribute {ATTR.block_shape}={_clip(block)} is not the ledger's "
                                              f"chunk shape {chunks}", False))
    return problems


def _clip(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def check_model_limits(model: Any, where: str, error: type[Exception] = StoreDamagedError) -> None:
    """Refuse model settings that would allocate or compute without bound.

    ``where`` names the source in the message (``settings`` of a sweep, or a store's record).
    """
    extra = dict(model.extra_dims)
    per_point = math.prod(int(v) for v in extra.values()) if extra else 1
    if any(int(v) < 1 for v in extra.values()) or per_point > MAX_VALUES_PER_POINT:
        raise error(f"{where}: model {model.name} settings give extra output dimensions {extra} ({per_point} values "
                    f"per point); allowed is 1 to {MAX_VALUES_PER_POINT} per point")
    cost = float(model.estimated_cost())
    if not 0 <= cost <= MAX_SECONDS_PER_POINT:
        raise error(f"{where}: model {model.name} settings ask for {cost:g} s per point; at most "
                    f"{MAX_SECONDS_PER_POINT:g} s is allowed")


def repair_metadata(path: str | os.PathLike[str]) -> list[str]:
    """Rebuild what can be rebuilt of a store's metadata; return one line per change.

    - a truncated root whose attributes still parse gets a new root (attributes kept);
    - an array whose own metadata is missing or does not parse is re-created from its
      consolidated copy (its chunks, if lost, are the chunk check's business);
    - a disagreement is settled in favour of the copy with the declared data type;
    - finally the consolidated metadata is rebuilt from the arrays' own files.
    """
    root = Path(path)
    changes: list[str] = []
    meta, reason = metadata.read_node_or_reason(root)
    if reason is not None or not isinstance(meta, dict):
        attrs = metadata.salvage_attributes(root)
        if attrs is None or ATTR.schema not in attrs:
            return changes
        meta = {"attributes": attrs, "zarr_format": 3, "node_type": "group"}
        changes.append("root zarr.json rebuilt around its surviving attributes")
    entries = metadata.consolidated_entries(meta)
    expected = _expected_dtypes(meta.get("attributes") or {})
    for problem in scan_metadata(root, meta):
        name = problem.variable
        if name is None or not problem.repairable:
            continue
        own, own_reason = metadata.read_node_or_reason(root / name)
        copy = entries.get(name)
        dtype = expected.get(name)
        if own_reason is not None or not isinstance(own, dict) or (
                isinstance(copy, dict) and dtype is not None and own.get("data_type") != dtype
                and copy.get("data_type") == dtype):
            metadata.write_node(root / name, copy)
            changes.append(f"{name}/zarr.json rebuilt from the consolidated metadata")
    metadata.write_node(root, {k: v for k, v in meta.items() if k != "consolidated_metadata"})
    metadata.reconsolidate(root)
    changes.append("consolidated metadata rebuilt from the arrays")
    return changes
