"""What killed processes leave under a results folder: half-built stores and stale block claims."""

from __future__ import annotations

import contextlib
import json
import os
import socket
import time
from pathlib import Path

from sweepshell.store import metadata

__all__ = ["CLAIMS_DIR", "find_leftovers", "leftover_temporaries", "stale_claim_files"]

#: the folder of block claims inside a store (see sweepshell.engine.claims)
CLAIMS_DIR = ".claims"


def _pid_gone(host: str, pid: str) -> bool:
    if host != socket.gethostname() or not pid.isdigit():
        return False
    try:
        os.kill(int(pid), 0)
    except ProcessLookupError:
        return True
    except (PermissionError, OverflowError):
        return False
    return False


def stale_claim_files(store: str | os.PathLike[str], ttl: float = 60.0) -> list[Path]:
    """Return the claim files of a store left by runners that are gone.

    A claim is stale when its runner's process no longer exists on this host, or when it has
    not been refreshed for ``ttl`` seconds (a runner on another host refreshes every ``ttl/4``).
    """
    folder = Path(store) / CLAIMS_DIR
    if not folder.is_dir():
        return []
    stale = []
    now = time.time()
    for claim in sorted(folder.iterdir()):
        try:
            age = now - claim.stat().st_mtime
            host, pid, _ = json.loads(claim.read_text())["runner"].rsplit(":", 2)
        except (OSError, ValueError, KeyError, TypeError, AttributeError):
            host, pid, age = "", "", now - claim.stat().st_mtime if claim.exists() else 0.0
        if age > ttl or _pid_gone(host, pid) or ".stale-" in claim.name:
            stale.append(claim)
    return stale


def leftover_temporaries(folder: str | os.PathLike[str]) -> list[Path]:
    """Return half-built stores (``NAME.sweepshell-tmp-PID``) in ``folder`` whose process is gone."""
    found = []
    for sub in sorted(Path(folder).glob("*" + metadata.TEMP_SUFFIX + "-*")):
        pid = sub.name.rsplit("-", 1)[-1]
        if sub.is_dir() and not sub.is_symlink() and _pid_gone(socket.gethostname(), pid):
            found.append(sub)
    return found


def find_leftovers(results_dir: str | os.PathLike[str], *, clean: bool = False) -> list[str]:
    """Return (and with ``clean`` remove) leftovers of killed processes under a results folder."""
    import shutil

    from sweepshell.store.catalog import iter_store_folders

    root = Path(results_dir)
    found: list[Path] = []
    for dirpath, dirnames, _files in os.walk(root, followlinks=False):
        found += leftover_temporaries(dirpath)
        dirnames[:] = [d for d in dirnames if not d.startswith(".") and metadata.TEMP_SUFFIX not in d
                       and not metadata.has_node(Path(dirpath) / d)]
    for store in iter_store_folders(root):
        found += stale_claim_files(store)
    if clean:
        for path in found:
            if path.is_dir():
                shutil.rmtree(path, ignore_errors=True)
            else:
                path.unlink(missing_ok=True)
                with contextlib.suppress(OSError):
                    path.parent.rmdir()
    return [p.relative_to(root).as_posix() for p in found]
