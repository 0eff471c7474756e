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
import re
import time
from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from pathlib import Path, PurePosixPath
from typing import Any

__all__ = [
    "AnyPath",
    "ObjectPath",
    "StorePath",
    "absolute_store_path",
    "as_path",
    "is_url",
    "public_options",
    "read_store_config",
    "register_options",
    "storage_options",
    "total_size",
    "zarr_store",
]

_SCHEME_RE = re.compile(r"^([A-Za-z][A-Za-z0-9+.-]+)://")
#: option names copied into provenance; every other option (keys, secrets, tokens, profiles) is left out
_PUBLIC_OPTIONS = ("endpoint_url", "region_name", "anon", "requester_pays", "account_name")
#: options given by store.options (or a worker's copy of them), by protocol
_OPTIONS: dict[str, dict[str, Any]] = {}


def is_url(path: Any) -> bool:
    """Return whether ``path`` is a URL of another filesystem than the local one (``file://`` is local)."""
    m = _SCHEME_RE.match(str(path))
    return m is not None and m.group(1).lower() not in ("file", "local")


def protocol_of(path: Any) -> str:
    """Return the URL scheme of ``path`` (``""`` for a plain path)."""
    m = _SCHEME_RE.match(str(path))
    return m.group(1).lower() if m else ""


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


def _filesystem_for(protocol: str) -> Any:
    return _filesystem(protocol, json.dumps(_OPTIONS.get(protocol, {}), sort_keys=True, default=str))


def _cached(func: Any) -> Any:
    from functools import lru_cache

    return lru_cache(maxsize=16)(func)


@_cached
def _filesystem(protocol: str, options_json: str) -> Any:
    import fsspec

    return fsspec.filesystem(protocol, **json.loads(options_json))


@dataclass(frozen=True)
class _Stat:
    st_size: int
    st_mtime: float


class ObjectPath:
    """A key prefix on an object store, with the path operations the store layer uses.

    Parameters
    ----------
    url
        ``PROTOCOL://bucket/key...`` (a trailing ``/`` is dropped).
    """

    def __init__(self, url: str) -> None:
        self.protocol = protocol_of(url)
        self.key = url[len(self.protocol) + 3:].rstrip("/")

    # --- pure path arithmetic ---
    def __str__(self) -> str:
        return f"{self.protocol}://{self.key}"

    def __repr__(self) -> str:
        return f"ObjectPath({str(self)!r})"

    def __eq__(self, other: object) -> bool:
        return isinstance(other, ObjectPath) and str(self) == str(other)

    def __hash__(self) -> int:
        return hash(str(self))

    def __lt__(self, other: ObjectPath) -> bool:
        return str(self) < str(other)

    def __truediv__(self, part: str | os.PathLike[str]) -> ObjectPath:
        return ObjectPath(f"{self}/{os.fspath(part).strip('/')}")

    @property
    def fs(self) -> Any:
        """The fsspec filesystem (one per protocol and options, cached)."""
        return _filesystem_for(self.protocol)

    @property
    def name(self) -> str:
        return PurePosixPath(self.key).name

    @property
    def stem(self) -> str:
        return PurePosixPath(self.key).stem

    @property
    def suffix(self) -> str:
        return PurePosixPath(self.key).suffix

    @property
    def parent(self) -> ObjectPath:
        parent = str(PurePosixPath(self.key).parent)
        return ObjectPath(f"{self.protocol}://{parent if parent != '.' else ''}")

    @property
    def parents(self) -> list[ObjectPath]:
        parts = PurePosixPath(self.key).parents
        return [ObjectPath(f"{self.protocol}://{p}") for p in parts if str(p) != "."]

    @property
    def parts(self) -> tuple[str, ...]:
        return PurePosixPath(self.key).parts

    def with_name(self, name: str) -> ObjectPath:
        return self.parent / name

    def relative_to(self, other: ObjectPath) -> PurePosixPath:
        return PurePosixPath(self.key).relative_to(other.key)

    def as_posix(self) -> str:
        return str(self)

    def resolve(self) -> ObjectPath:
        return self

    # --- reading ---
    def _info(self) -> dict[str, Any] | None:
        self.fs.invalidate_cache(self.key)  # other processes write too: never answer from a stale listing
        try:
            info: dict[str, Any] = self.fs.info(self.key)
        except (FileNotFoundError, OSError):
            return None
        return info

    def exists(self) -> bool:
        """Whether an object or any object under this prefix exists."""
        return self._info() is not None

    def is_file(self) -> bool:
        info = self._info()
        return info is not None and info.get("type") == "file"

    def is_dir(self) -> bool:
        info = self._info()
        return info is not None and info.get("type") == "directory"

    def is_symlink(self) -> bool:
        return False

    def stat(self) -> _Stat:
        info = self._info()
        if info is None:
            raise FileNotFoundError(str(self))
        modified = info.get("LastModified") or info.get("mtime") or info.get("updated") or 0.0
        mtime = modified.timestamp() if hasattr(modified, "timestamp") else float(modified or 0.0)
        return _Stat(int(info.get("size") or 0), mtime)

    def read_bytes(self) -> bytes:
        data: bytes = self.fs.cat_file(self.key)
        return data

    def read_text(self, errors: str = "strict") -> str:
        return self.read_bytes().decode("utf-8", errors=errors)

    def iterdir(self) -> Iterator[ObjectPath]:
        """The objects and sub-prefixes directly under this prefix (nothing when there is none)."""
        self.fs.invalidate_cache(self.key)
        try:
            entries = self.fs.ls(self.key, detail=False)
        except FileNotFoundError:
            return iter(())
        return iter(ObjectPath(f"{self.protocol}://{e.rstrip('/')}") for e in entries
                    if e.rstrip("/") != self.key)

    def glob(self, pattern: str) -> list[ObjectPath]:
        self.fs.invalidate_cache(self.key)
        return [ObjectPath(f"{self.protocol}://{k}") for k in self.fs.glob(f"{self.key}/{pattern}")]

    def rglob(self, pattern: str) -> list[ObjectPath]:
        """Every object under this prefix whose name matches ``pattern`` (one listing)."""
        from fnmatch import fnmatchcase

        return [self / k for k in self.find() if fnmatchcase(k.rsplit("/", 1)[-1], pattern)]

    def find(self) -> list[str]:
        """Every object key under this prefix, relative to it (one paginated listing)."""
        self.fs.invalidate_cache(self.key)
        try:
            keys = self.fs.find(self.key)
        except FileNotFoundError:
            return []
        base = self._listed_base()
        return [k[len(base) + 1:] for k in keys if k.startswith(base + "/")]

    def _listed_base(self) -> str:
        """The prefix as the filesystem spells it in listings (``memory://`` adds a leading ``/``)."""
        return str(self.fs._strip_protocol(str(self))).rstrip("/")

    def find_detail(self) -> dict[str, tuple[int, float]]:
        """Every object under this prefix, relative to it: (size in bytes, modification time in s)."""
        self.fs.invalidate_cache(self.key)
        try:
            found = self.fs.find(self.key, detail=True)
        except FileNotFoundError:
            return {}
        base = self._listed_base()
        n = len(base) + 1
        out = {}
        for key, info in found.items():
            if key.startswith(base + "/"):
                modified = info.get("LastModified") or info.get("mtime") or 0.0
                out[key[n:]] = (int(info.get("size") or 0),
                                modified.timestamp() if hasattr(modified, "timestamp") else float(modified or 0.0))
        return out

    # --- writing ---
    def write_bytes(self, data: bytes) -> None:
        self.fs.pipe_file(self.key, data)

    def write_text(self, text: str) -> None:
        self.write_bytes(text.encode("utf-8"))

    def create_exclusive(self, data: bytes) -> bool:
        """Create the object only if it does not exist (a conditional write); return whether this call did.

        Raises
        ------
        NotImplementedError
            If the filesystem cannot create conditionally (then several writers cannot coordinate).
        """
        try:
            with self.fs.open(self.key, "xb") as fh:
                fh.write(data)
        except FileExistsError:
            return False
        except (ValueError, TypeError) as exc:  # "xb" mode unknown to this filesystem
            raise NotImplementedError(f"{self.protocol}:// has no create-if-absent write ({exc})") from None
        return True

    def unlink(self, missing_ok: bool = False) -> None:
        try:
            self.fs.rm_file(self.key)
        except FileNotFoundError:
            if not missing_ok:
                raise

    def mkdir(self, parents: bool = False, exist_ok: bool = False) -> None:
        """Nothing to do: prefixes exist as soon as an object is written under them."""

    def rmdir(self) -> None:
        """Nothing to do: an empty prefix does not exist."""

    def rmtree(self) -> None:
        """Remove every object under this prefix."""
        self.fs.invalidate_cache(self.key)
        keys = self.fs.find(self.key)
        if keys:
            self.fs.rm(keys)
        self.fs.invalidate_cache(self.key)

    def age(self) -> float:
        """Seconds since the object was last written (by the object store's clock, as seen here)."""
        return max(0.0, time.time() - self.stat().st_mtime)


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


def zarr_store(path: AnyPath, *, read_only: bool = False) -> Any:
    """Return what zarr and xarray open: the local path as a string, or an ``FsspecStore`` for a URL."""
    loc = as_path(path)
    if isinstance(loc, Path):
        return str(loc)
    from zarr.storage import FsspecStore

    return FsspecStore.from_url(str(loc), storage_options=storage_options(str(loc)) or None, read_only=read_only)
