"""What killed processes leave under a results folder: half-built stores and stale block claims."""

from __future__ import annotations

import contextlib
import json
import os
import socket
import time
from pathlib import Path
from typing import Any

from sweepshell.store import metadata
from sweepshell.store.liveness import is_process_gone
from sweepshell.store.location import AnyPath, ObjectPath, StorePath, as_path
from sweepshell.store.publish import CREATING_MARKER, clean_stale_temporaries, creation_abandoned

__all__ = ["CLAIMS_DIR", "claim_is_stale", "find_leftovers", "leftover_temporaries", "stale_claim_files"]

#: the folder of block claims inside a store (see sweepshell.engine.claims)
CLAIMS_DIR = ".claims"


def claim_is_stale(record: Any, now: float | None = None) -> bool:
    """Whether an object-store claim record's lease ran out or its runner's process is gone from this host."""
    now = time.time() if now is None else now
    try:
        lease_until = float(record["lease_until"])
        host, pid, _ = str(record["runner"]).rsplit(":", 2)
    except (TypeError, KeyError, ValueError):
        return True
    return lease_until < now or is_process_gone(host, pid)


def stale_claim_files(store: AnyPath, ttl: float = 60.0) -> list[StorePath]:
    """Return the claim files of a store left by runners that are gone.

    A claim is stale when its runner's process no longer exists on this host, or when it has
    not been refreshed for ``ttl`` seconds (a runner on another host refreshes every ``ttl/4``);
    on an object store, when its recorded lease ran out.
    """
    where = as_path(store) / CLAIMS_DIR
    if isinstance(where, ObjectPath):
        found: list[StorePath] = []
        for obj in sorted(where.iterdir()):
            try:
                record = json.loads(obj.read_text())
            except (OSError, ValueError):
                record = None
            if claim_is_stale(record):
                found.append(obj)
        return found
    folder: Path = where
    if not folder.is_dir():
        return []
    stale: list[StorePath] = []
    now = time.time()
    for claim in sorted(folder.iterdir()):
        try:
            age = now - claim.stat().st_mtime
            host, pid, _ = json.loads(claim.read_text())["runner"].rsplit(":", 2)
        except (OSError, ValueError, KeyError, TypeError, AttributeError):
            host, pid, age = "", "", now - claim.stat().st_mtime if claim.exists() else 0.0
        if age > ttl or is_process_gone(host, pid) or ".stale-" in claim.name:
            stale.append(claim)
    return stale


def leftover_temporaries(folder: str | os.PathLike[str]) -> list[Path]:
    """Return half-built stores (``NAME.sweepshell-tmp-PID``) in ``folder`` whose process is gone."""
    found = []
    for sub in sorted(Path(folder).glob("*" + metadata.TEMP_SUFFIX + "-*")):
        pid = sub.name.rsplit("-", 1)[-1]
        if sub.is_dir() and not sub.is_symlink() and is_process_gone(socket.gethostname(), pid):
            found.append(sub)
    return found


def find_leftovers(results_dir: AnyPath, *, clean: bool = False) -> list[str]:
    """Return (and with ``clean`` remove) leftovers of killed processes under a results folder."""
    import shutil

    from sweepshell.store.catalog import iter_store_folders

    root = as_path(results_dir)
    found: list[StorePath] = []
    if isinstance(root, ObjectPath):
        found += _object_leftovers(root)
    else:
        for dirpath, dirnames, _files in os.walk(root, followlinks=False):
            found += leftover_temporaries(dirpath)
            dirnames[:] = [d for d in dirnames if not d.startswith(".") and metadata.TEMP_SUFFIX not in d
                           and not metadata.has_node(Path(dirpath) / d)]
    for store in iter_store_folders(root):
        found += stale_claim_files(store)
    if clean:
        for path in found:
            if isinstance(path, ObjectPath) and f"/{CLAIMS_DIR}/" in str(path):
                path.unlink(missing_ok=True)
            elif isinstance(path, ObjectPath):
                clean_stale_temporaries(path)
            elif path.is_dir():
                shutil.rmtree(path, ignore_errors=True)
            else:
                path.unlink(missing_ok=True)
                with contextlib.suppress(OSError):
                    path.parent.rmdir()
    return [p.relative_to(root).as_posix() for p in found]  # type: ignore[arg-type]


def _object_leftovers(root: ObjectPath) -> list[StorePath]:
    """Return the half-uploaded stores under an object-store prefix whose creator is gone."""
    found: list[StorePath] = []
    for key in root.find():
        if key.endswith("/" + CREATING_MARKER):
            store = root / key[:-len(CREATING_MARKER) - 1]
            if creation_abandoned(store):
                found.append(store)
    return found
