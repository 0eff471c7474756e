"""The catalog: what has been computed under a results folder, by which model version.

The stores are the source of truth. The catalog finds them by walking the folder and keeps
an index (``DIR/.sweepshell-catalog.sqlite``, SQLite from the standard library) that only
caches each store's summary under a fingerprint of the store's files (relative path, size
and modification time of every file). A store whose fingerprint changed is read again; a
store that disappeared is dropped from the index. The index is never trusted:

- a file that is not an SQLite database, or one whose ``application_id`` / ``user_version``
  is not ours (a foreign or older index), is deleted and rebuilt;
- a cached row is used only for a store found on disk with the same fingerprint, and its
  record must parse as plain JSON of the expected shape, otherwise the store is re-read;
- paths never come from the index, only from walking the folder; symbolic links are not
  followed and a store holding one is listed with a problem and not read;
- :func:`find_compatible_stores` re-checks each candidate's own attributes before
  returning it.

Nothing read from a store or from the index is imported, unpickled or executed: attributes
are parsed as JSON, the ledger is decoded by zarr as ``uint8``.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import hashlib
import json
import logging
import os
from collections.abc import Iterator
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from sweepshell.errors import StoreNotFoundError
from sweepshell.models.base import Status
from sweepshell.store import metadata
from sweepshell.store.catalog_index import open_index, parse_record, read_cached, update_index
from sweepshell.store.leftovers import find_leftovers
from sweepshell.store.metadata import ATTR

__all__ = [
    "CATALOG_FILE",
    "CatalogEntry",
    "CatalogListing",
    "find_compatible_stores",
    "iter_store_folders",
    "read_axis_order",
    "read_catalog",
]

log = logging.getLogger(__name__)

#: name of the index file inside a results folder
CATALOG_FILE = ".sweepshell-catalog.sqlite"


@dataclass(frozen=True)
class CatalogEntry:
    """One store under a results folder.

    Attributes
    ----------
    path
        Path of the store relative to the results folder (POSIX separators).
    sweep, model, model_version
        From the store's attributes (``None`` if unreadable).
    settings_json, fixed_json
        The store's settings and fixed parameters, exactly as recorded (canonical JSON strings).
    axes
        One mapping per axis: ``name``, ``size``, ``min``, ``max`` (numbers, or first/last name of a
        categorical axis) and ``values`` for axes of at most 12 values.
    total
        Number of grid points.
    counts
        Status name → number of points.
    bytes_on_disk
        Sum of the sizes of the store's files, bytes.
    created
        Creation time recorded in the store (ISO 8601, UTC).
    updated
        Latest modification time of any of the store's files (ISO 8601, UTC).
    problem
        Why the store could not be read (``None`` when it was read).
    """

    path: str
    sweep: str | None = None
    model: str | None = None
    model_version: str | None = None
    settings_json: str | None = None
    fixed_json: str | None = None
    axes: list[dict[str, Any]] = field(default_factory=list)
    total: int = 0
    counts: dict[str, int] = field(default_factory=dict)
    bytes_on_disk: int = 0
    created: str | None = None
    updated: str | None = None
    problem: str | None = None

    @property
    def complete(self) -> bool:
        return self.problem is None and self.counts.get(Status.pending.name, 0) == 0

    def to_dict(self) -> dict[str, Any]:
        """Return a JSON-ready mapping (with ``complete``)."""
        return {**asdict(self), "complete": self.complete}


@dataclass(frozen=True)
class CatalogListing:
    """The stores under a results folder and how the index was used.

    Attributes
    ----------
    results_dir
        The folder walked.
    entries
        One entry per store, sorted by path.
    index_path
        The index file, or ``None`` if it could not be written (read-only folder).
    reread
        Number of stores read from disk this time (new or changed); the others came from the index.
    rebuilt
        Whether the index file was missing, corrupted or foreign and was created afresh.
    leftovers
        Paths (relative to the results folder) of what killed processes left behind: half-built
        stores (``*.sweepshell-tmp-PID``) and stale block claims; ``clean=True`` removed them.
    """

    results_dir: str
    entries: tuple[CatalogEntry, ...]
    index_path: str | None
    reread: int
    rebuilt: bool
    leftovers: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        return {"results_dir": self.results_dir, "index": self.index_path, "reread": self.reread,
                "rebuilt": self.rebuilt, "stores": [e.to_dict() for e in self.entries],
                "leftovers": list(self.leftovers)}


def _is_sweepshell_store(folder: Path) -> bool:
    if (folder / metadata.META_FILE).is_symlink():
        return False
    return metadata.is_store(folder)


def iter_store_folders(results_dir: str | os.PathLike[str]) -> Iterator[Path]:
    """Yield every store folder under ``results_dir`` (sorted, symbolic links not followed).

    Folders whose names start with ``.`` and half-built templates are skipped; a store's own
    sub-folders are not searched for further stores.
    """
    root = Path(results_dir)
    for dirpath, dirnames, _files in os.walk(root, followlinks=False):
        here = Path(dirpath)
        keep = []
        for name in sorted(dirnames):
            sub = here / name
            if name.startswith(".") or metadata.TEMP_SUFFIX in name or sub.is_symlink():
                continue
            if _is_sweepshell_store(sub):
                yield sub
            else:
                keep.append(name)
        dirnames[:] = keep


def _walk_files(store: Path) -> tuple[str, int, float, bool]:
    """Return (fingerprint, bytes, latest mtime in s, holds a symlink) from one stat per file."""
    digest = hashlib.sha256()
    total = 0
    latest = 0.0
    has_link = False
    for dirpath, dirnames, files in os.walk(store, followlinks=False):
        dirnames.sort()
        for name in [*dirnames, *files]:
            full = os.path.join(dirpath, name)
            if os.path.islink(full):
                has_link = True
        for name in sorted(files):
            full = os.path.join(dirpath, name)
            st = os.lstat(full)
            rel = os.path.relpath(full, store)
            digest.update(f"{rel}\0{st.st_size}\0{st.st_mtime_ns}\n".encode())
            total += st.st_size
            latest = max(latest, st.st_mtime)
    return digest.hexdigest(), total, latest, has_link


def _iso(seconds: float) -> str | None:
    if seconds <= 0:
        return None
    return _dt.datetime.fromtimestamp(seconds, _dt.UTC).isoformat(timespec="seconds")


def read_axis_order(store: str | os.PathLike[str], axes_values: dict[str, Any]) -> list[str]:
    """Return the axis names in plan (dimension) order.

    ``axes_json`` is canonical JSON with sorted keys, so the order comes from the ledger's
    ``dimension_names``; if that is unreadable or disagrees, the record's order is used.
    """
    try:
        names = metadata.dimension_names(store, metadata.STATUS_VAR)
    except (OSError, ValueError, AttributeError):
        names = []
    return names if sorted(names) == sorted(axes_values) else list(axes_values)


def _summarize_axes(axes_values: dict[str, list[Any]], order: list[str]) -> list[dict[str, Any]]:
    axes = []
    for name in order:
        values = axes_values[name]
        numeric = [v for v in values if isinstance(v, (int, float)) and not isinstance(v, bool)]
        low: Any
        high: Any
        if numeric and len(numeric) == len(values):
            low, high = min(numeric), max(numeric)
        else:
            low, high = (values[0], values[-1]) if values else (None, None)
        axes.append({"name": str(name), "size": len(values), "min": low, "max": high,
                     "values": values if len(values) <= 12 else None})
    return axes


def _read_entry(store: Path, rel: str, size: int, latest: float) -> CatalogEntry:
    """Read one store's summary from its own files (attributes as JSON, ledger through zarr)."""
    from sweepshell.store.reader import check_readable_store, read_ledger

    updated = _iso(latest)
    try:
        attrs = check_readable_store(store)
        axes_values = metadata.read_record(attrs, ATTR.axes)
        if not isinstance(axes_values, dict):
            raise ValueError("axes record is not a mapping")
        block_shape = tuple(int(b) for b in attrs[ATTR.block_shape])
        ledger = read_ledger(store, block_shape)
    except Exception as exc:  # any unreadable store is listed with the reason, never fatal for the catalog
        return CatalogEntry(path=rel, bytes_on_disk=size, updated=updated,
                            problem=f"{type(exc).__name__}: {str(exc).splitlines()[0] if str(exc) else ''}")
    raw = np.bincount(ledger.reshape(-1), minlength=len(Status))
    counts = {s.name: int(raw[s.value]) for s in Status}
    unknown = int(raw[len(Status):].sum())
    return CatalogEntry(
        path=rel, sweep=_str_or_none(attrs.get(ATTR.sweep_name)), model=_str_or_none(attrs.get(ATTR.model)),
        model_version=_str_or_none(attrs.get(ATTR.model_version)),
        settings_json=_str_or_none(attrs.get(ATTR.settings)), fixed_json=_str_or_none(attrs.get(ATTR.fixed)),
        axes=_summarize_axes(axes_values, read_axis_order(store, axes_values)), total=int(ledger.size),
        counts=counts, bytes_on_disk=size,
        created=_str_or_none(attrs.get(ATTR.created)), updated=updated,
        problem=f"{unknown} points with unknown status codes" if unknown else None)


def _str_or_none(v: Any) -> str | None:
    return v if isinstance(v, str) else None


def read_catalog(results_dir: str | os.PathLike[str] = "results", *, use_index: bool = True,
                 clean: bool = False) -> CatalogListing:
    """List the stores under ``results_dir``, reading only the stores that changed since the last call.

    Parameters
    ----------
    results_dir
        The results folder (searched recursively; symbolic links are not followed).
    use_index
        Keep and use the index file; without it every store is read.
    clean
        Remove the leftovers of killed processes (see :func:`find_leftovers`).

    Raises
    ------
    StoreNotFoundError
        If ``results_dir`` is not a folder.
    """
    root = Path(results_dir)
    if not root.is_dir():
        raise StoreNotFoundError(f"results folder {str(root)!r} does not exist; give a folder holding .zarr stores",
                                 field="dir", value=str(root))
    index_path = root / CATALOG_FILE
    con, rebuilt = (None, False)
    if use_index:
        con, rebuilt = open_index(index_path)
    cached = read_cached(con)
    leftovers = find_leftovers(root, clean=clean)
    root_real = root.resolve()
    entries: list[CatalogEntry] = []
    fresh: list[tuple[str, str, str]] = []
    for store in iter_store_folders(root):
        rel = store.relative_to(root).as_posix()
        if not store.resolve().is_relative_to(root_real):  # pragma: no cover - links are not followed
            continue
        fingerprint, size, latest, has_link = _walk_files(store)
        if has_link:
            entries.append(CatalogEntry(path=rel, bytes_on_disk=size, updated=_iso(latest),
                                        problem="the store holds symbolic links; not read"))
            continue
        hit = cached.get(rel)
        record = parse_record(hit[1], rel) if hit is not None and hit[0] == fingerprint else None
        entry = None if record is None else CatalogEntry(**record)
        if entry is None:
            entry = _read_entry(store, rel, size, latest)
            fresh.append((rel, fingerprint, json.dumps(asdict(entry))))
        entries.append(entry)
    if con is not None:
        update_index(con, index_path, fresh, set(cached) - {e.path for e in entries})
    return CatalogListing(results_dir=str(root), entries=tuple(sorted(entries, key=lambda e: e.path)),
                          index_path=str(index_path) if con is not None else None, reread=len(fresh),
                          rebuilt=rebuilt, leftovers=tuple(leftovers))


def find_compatible_stores(results_dir: str | os.PathLike[str], model: str, model_version: str,
                           settings_json: str, *, fixed_json: str | None = None) -> list[Path]:
    """Return the stores under ``results_dir`` whose values may be reused for a sweep.

    A store qualifies when its model name, model version and settings record are exactly the
    given strings (and its fixed-parameter record too, if ``fixed_json`` is given). The catalog
    narrows the candidates; each is then checked again against its own ``zarr.json``, so a
    stale or forged index cannot make an incompatible store look compatible.

    Parameters
    ----------
    results_dir
        The results folder; a missing folder yields an empty list.
    model, model_version
        Registry name and version of the model.
    settings_json
        The settings record as written in store attributes (``model_settings_json``), i.e. the
        canonical JSON made by :func:`sweepshell.store.writer.plan_attrs`.
    fixed_json
        The fixed-parameter record (``fixed_parameters_json``) to match as well, or ``None``.

    Returns
    -------
    list of Path
        Store folders, sorted by path; empty if none qualifies.
    """
    root = Path(results_dir)
    if not root.is_dir():
        return []
    wanted = {ATTR.model: model, ATTR.model_version: model_version, ATTR.settings: settings_json}
    if fixed_json is not None:
        wanted[ATTR.fixed] = fixed_json
    found = []
    for entry in read_catalog(root).entries:
        if entry.problem is not None or entry.model != model or entry.model_version != model_version \
                or entry.settings_json != settings_json:
            continue
        if fixed_json is not None and entry.fixed_json != fixed_json:
            continue
        store = root / entry.path
        with contextlib.suppress(OSError, ValueError, AttributeError):
            attrs = metadata.read_attrs(store)
            if all(attrs.get(k) == v for k, v in wanted.items()) and attrs.get(ATTR.schema) == metadata.SCHEMA_VERSION:
                found.append(store)
    return found
