"""Where a store lives: a local folder (``pathlib.Path``) or a prefix on an object store (:class:`ObjectPath`).

Plain paths and ``file://`` URLs stay :class:`pathlib.Path`, so local stores keep the fast POSIX code
(no fsspec in the way). ``s3://``, ``gs://``, ``az://`` (and any other fsspec protocol whose package is
installed) become :class:`ObjectPath`: the few path operations the store layer uses (join, read, write,
list, remove), done through one fsspec filesystem. Object stores have no folders and no rename; the
modules that need atomicity (template creation in ``writer.py``, claims in ``engine/claims.py``) use
:meth:`ObjectPath.create_exclusive` (a conditional create-if-absent) instead.

Options for the filesystem (``endpoint_url``, ``anon``, ``profile``, credentials) come from
``store.options`` (registered with :func:`register_options`), then from fsspec's own configuration
(``FSSPEC_S3_ENDPOINT_URL``-style environment variables) and each filesystem's usual environment
variables and credential files. Options never enter provenance: :func:`public_options` keeps only the
harmless ones.
"""

from __future__ import annotations

import json
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from sweepshell.store.objectpath import ObjectPath, protocol_of

__all__ = [
    "AnyPath",
    "ObjectPath",
    "StorePath",
    "absolute_store_path",
    "as_path",
    "describe_storage_fault",
    "filesystem_for",
    "is_url",
    "open_dataset",
    "protocol_of",
    "public_options",
    "read_store_config",
    "register_options",
    "storage_options",
    "total_size",
    "zarr_store",
]

#: option names copied into provenance; every other option (keys, secrets, tokens, profiles) is left out
_PUBLIC_OPTIONS = ("endpoint_url", "region_name", "anon", "requester_pays", "account_name")
#: options given by store.options (or a worker's copy of them), by protocol
_OPTIONS: dict[str, dict[str, Any]] = {}


def is_url(path: Any) -> bool:
    """Return whether ``path`` is a URL of another filesystem than the local one (``file://`` is local)."""
    return protocol_of(path) not in ("", "file", "local")


def register_options(path: Any, options: Mapping[str, Any] | None) -> None:
    """Use ``options`` for every filesystem of ``path``'s protocol in this process (``store.options``)."""
    if options and is_url(path):
        _OPTIONS[protocol_of(path)] = dict(options)
        _filesystem.cache_clear()


def storage_options(path: Any) -> dict[str, Any]:
    """Return the registered options of ``path``'s protocol (``{}`` for local paths and unregistered ones)."""
    return dict(_OPTIONS.get(protocol_of(path), {})) if is_url(path) else {}


def read_store_config(store: Any, default_path: str, *, process_workers: bool) -> tuple[str, dict[str, Any]]:
    """Return the checked ``(store.path, store.options)`` of a sweep's ``store`` section.

    ``file://`` URLs become plain paths; the options are registered for this process.

    Raises
    ------
    ConfigError
        If the section, the path or the options cannot be used (one line naming the fix).
    """
    from sweepshell.errors import ConfigError
    from sweepshell.store.integrity import check_store_path

    store = store or {}
    if not isinstance(store, Mapping):
        raise ConfigError("store must be a mapping (store: {path: results/NAME.zarr})", field="store", value=store)
    path = store.get("path") or default_path
    check_store_path(path, process_workers=process_workers)
    path = str(_local(path)) if isinstance(path, str) and not is_url(path) else path
    options = store.get("options") or {}
    if not isinstance(options, Mapping) or not all(isinstance(k, str) for k in options):
        raise ConfigError("store.options must be a mapping of filesystem options (store.options.endpoint_url=URL)",
                          field="store.options", value="...")
    if options and not is_url(path):
        raise ConfigError("store.options apply to object-store URLs only (s3://, gs://, az://); remove them for "
                          f"the folder {path!r}", field="store.options", value="...")
    options = {k: (dict(v) if isinstance(v, Mapping) else v) for k, v in options.items()}
    register_options(path, options)
    return path, options


def public_options(options: Mapping[str, Any] | None) -> dict[str, Any]:
    """Return the options that may be recorded in provenance: no keys, secrets, tokens or profiles."""
    given = dict(options or {})
    return {k: given[k] for k in sorted(given)
            if k in _PUBLIC_OPTIONS and isinstance(given[k], (str, bool, int, float))}


def _local(path: str) -> Path:
    if path.lower().startswith("file://"):
        return Path(path[len("file://"):])
    return Path(path)


def filesystem_for(protocol: str) -> Any:
    """Return the fsspec filesystem of ``protocol`` with the registered options (cached)."""
    return _filesystem(protocol, json.dumps(_OPTIONS.get(protocol, {}), sort_keys=True, default=str))


def _cached(func: Any) -> Any:
    from functools import lru_cache

    return lru_cache(maxsize=16)(func)


@_cached
def _filesystem(protocol: str, options_json: str) -> Any:
    import fsspec

    return fsspec.filesystem(protocol, **json.loads(options_json))


#: a store location: a local folder or an object-store prefix
StorePath = Path | ObjectPath
#: what functions taking a store location accept
AnyPath = str | os.PathLike[str] | ObjectPath


def as_path(path: AnyPath) -> StorePath:
    """Return the location of ``path``: :class:`ObjectPath` for object-store URLs, :class:`Path` otherwise."""
    if isinstance(path, (Path, ObjectPath)):
        return path
    text = os.fspath(path)
    return ObjectPath(text) if is_url(text) else _local(text)


_NO_CREDENTIALS = ("NoCredentialsError", "PartialCredentialsError", "ProfileNotFound", "DefaultCredentialsError")
_UNREACHABLE = ("EndpointConnectionError", "ConnectTimeoutError", "ClientConnectorError", "ConnectionError",
                "ServerDisconnectedError", "ReadTimeoutError")


def describe_storage_fault(exc: BaseException) -> str | None:
    """Return one line (with the fix) if ``exc`` is an object-store fault: credentials, endpoint, bucket, access."""
    seen: set[int] = set()
    current: BaseException | None = exc
    while current is not None and id(current) not in seen:
        seen.add(id(current))
        name, text = type(current).__name__, str(current).splitlines()[0][:160] if str(current) else ""
        if name in _NO_CREDENTIALS:
            return (f"the object store needs credentials ({text}); set them as usual for the filesystem "
                    "(AWS_ACCESS_KEY_ID/AWS_SECRET_ACCESS_KEY, a credentials file, store.options.profile) "
                    "or store.options.anon=true for a public bucket")
        if name in _UNREACHABLE:
            return (f"the object store cannot be reached ({text}); check store.options.endpoint_url (or "
                    "AWS_ENDPOINT_URL) and the network")
        if "bucket does not exist" in text.lower() or "NoSuchBucket" in text:
            return f"the bucket does not exist ({text}); create it first or check the store URL"
        if isinstance(current, PermissionError) or "AccessDenied" in text or "InvalidAccessKeyId" in text:
            return f"the object store refused access ({text}); check the credentials and the bucket's permissions"
        current = current.__cause__ or current.__context__
    return None


def absolute_store_path(path: AnyPath) -> str:
    """Return ``path`` as workers elsewhere can use it: a URL as it is, a local path made absolute."""
    return str(path) if is_url(path) else os.path.abspath(os.fspath(as_path(path)))  # type: ignore[arg-type]


def total_size(path: AnyPath) -> int:
    """Return the bytes held under a store folder or prefix (one listing on an object store)."""
    loc = as_path(path)
    if isinstance(loc, ObjectPath):
        return sum(size for size, _ in loc.find_detail().values())
    return sum(f.stat().st_size for f in loc.rglob("*") if f.is_file())


def open_dataset(path: AnyPath, **kwargs: Any) -> Any:
    """Open a store with :func:`xarray.open_zarr`; ``encoding["source"]`` is the store's path or full URL."""
    import xarray as xr

    ds = xr.open_zarr(zarr_store(path, read_only=True), consolidated=True, zarr_format=3, **kwargs)
    if is_url(path):  # xarray records an object store's key without its protocol
        ds.encoding["source"] = str(path)
    return ds


def zarr_store(path: AnyPath, *, read_only: bool = False) -> Any:
    """Return what zarr and xarray open: the local path as a string, or an ``FsspecStore`` for a URL."""
    loc = as_path(path)
    if isinstance(loc, Path):
        return str(loc)
    from zarr.storage import FsspecStore

    return FsspecStore.from_url(str(loc), storage_options=storage_options(str(loc)) or None, read_only=read_only)
