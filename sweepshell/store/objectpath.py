"""A key prefix on an object store with the few path operations the store layer uses (see location.py).

Object stores have no folders and no rename. :class:`ObjectPath` lists a prefix in one paginated request,
reads and writes whole objects (a single PUT replaces an object atomically), and offers
:meth:`ObjectPath.create_exclusive`, a conditional create-if-absent write, where atomicity is needed.
Every listing and lookup bypasses fsspec's listing cache: other processes write the same prefix.
"""

from __future__ import annotations

import os
import re
import time
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import PurePosixPath
from typing import Any

__all__ = ["ObjectPath", "protocol_of"]


_SCHEME_RE = re.compile(r"^([A-Za-z][A-Za-z0-9+.-]+)://")


def protocol_of(path: Any) -> str:
    """Return the URL scheme of ``path`` in lower case (``""`` for a plain path)."""
    m = _SCHEME_RE.match(str(path))
    return m.group(1).lower() if m else ""


class NoConditionalWrites(Exception):
    """The filesystem cannot create an object only if it is absent, so several writers cannot coordinate."""


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
        from sweepshell.store.location import filesystem_for

        return filesystem_for(self.protocol)

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
        except FileNotFoundError:  # absent; access denied, unreachable or no credentials are faults to report
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
        NoConditionalWrites
            If the filesystem cannot create conditionally (then several writers cannot coordinate).
        """
        try:
            with self.fs.open(self.key, "xb") as fh:
                fh.write(data)
        except FileExistsError:
            return False
        except (ValueError, TypeError) as exc:  # "xb" mode unknown to this filesystem
            raise NoConditionalWrites(f"{self.protocol}:// has no create-if-absent write ({exc})") from None
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


