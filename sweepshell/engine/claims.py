"""Block claims: several runners (on one machine or sharing a folder) work on one store.

Before a runner computes a block it creates a claim file for it with ``O_CREAT | O_EXCL``
(atomic on local and network filesystems), and refreshes the file's modification time
while the block is in flight (a heartbeat). A claim whose heartbeat is older than the
time-to-live belongs to a runner that died: another runner takes it over by renaming it
away first (only one rename can succeed), then claiming afresh. A finished block's claim
is removed after its status is written, so the ledger, never the claims, says what is done.

Claims live in the store folder under ``.claims/`` (a name zarr ignores), one small file
per block in flight, never in shared attributes (concurrent attribute updates lose writes).

Stores on object storage have no rename and no modification time to refresh: there
:class:`ObjectClaimBook` (in :mod:`sweepshell.engine.object_claims`) uses conditional
create-if-absent writes and a lease time recorded in the claim; :func:`open_claims` picks
the right kind for a store path.
"""

from __future__ import annotations

import contextlib
import json
import os
import socket
import time
import uuid
from pathlib import Path

from sweepshell.store.leftovers import CLAIMS_DIR
from sweepshell.store.liveness import is_process_gone

__all__ = ["CLAIMS_DIR", "ClaimBook", "open_claims", "remove_stale_claims"]


class ClaimBook:
    """The claims of one runner on one store.

    Parameters
    ----------
    store_path
        The store folder.
    ttl
        Seconds after the last heartbeat when a claim counts as abandoned.
    """

    def __init__(self, store_path: str | os.PathLike[str], ttl: float = 60.0) -> None:
        self.folder = Path(store_path) / CLAIMS_DIR
        self.folder.mkdir(exist_ok=True)
        self.ttl = ttl
        self.runner = f"{socket.gethostname()}:{os.getpid()}:{uuid.uuid4().hex[:8]}"
        self.held: set[tuple[int, ...]] = set()
        self.taken_over = 0

    def _path(self, index: tuple[int, ...]) -> Path:
        return self.folder / ("block-" + "-".join(map(str, index)) + ".claim")

    def try_claim(self, index: tuple[int, ...]) -> bool:
        """Claim a block; return False if a live runner holds it."""
        path = self._path(index)
        if self._create(path):
            self.held.add(index)
            return True
        try:
            age = time.time() - path.stat().st_mtime
        except FileNotFoundError:  # released meanwhile: try once more
            if self._create(path):
                self.held.add(index)
                return True
            return False
        if age < self.ttl and not self._holder_is_dead(path):
            return False
        tomb = path.with_name(path.name + f".stale-{uuid.uuid4().hex[:8]}")
        try:
            os.rename(path, tomb)  # only one runner wins this rename
        except FileNotFoundError:
            return False
        tomb.unlink(missing_ok=True)
        if self._create(path):
            self.held.add(index)
            self.taken_over += 1
            return True
        return False

    def _holder_is_dead(self, path: Path) -> bool:
        """Whether the claim was made on this host by a process that no longer exists."""
        try:
            host, pid, _ = json.loads(path.read_text())["runner"].rsplit(":", 2)
        except (OSError, ValueError, KeyError, TypeError):
            return False  # being written, or unreadable: trust the heartbeat age instead
        return is_process_gone(host, pid)

    def _create(self, path: Path) -> bool:
        for _ in range(5):
            try:
                fd = os.open(path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
                break
            except FileExistsError:
                return False
            except FileNotFoundError:  # another runner just finished and removed the (empty) folder
                self.folder.mkdir(exist_ok=True)
        else:
            return False
        with os.fdopen(fd, "w") as fh:
            json.dump({"runner": self.runner, "claimed": time.time()}, fh)
        return True

    def heartbeat(self) -> None:
        """Refresh every claim this runner holds."""
        for index in list(self.held):
            with contextlib.suppress(FileNotFoundError):
                os.utime(self._path(index))

    def release(self, index: tuple[int, ...]) -> None:
        """Drop the claim of a block (after its status was written, or when giving it up)."""
        if index in self.held:
            self.held.discard(index)
            self._path(index).unlink(missing_ok=True)

    def release_all(self) -> None:
        """Drop every claim; remove the claims folder when no other runner has one (zarr warns about it)."""
        for index in list(self.held):
            self.release(index)
        with contextlib.suppress(OSError):
            self.folder.rmdir()


def open_claims(store_path: str | os.PathLike[str], ttl: float = 60.0) -> ClaimBook:
    """Return the claims of a new runner on the store at ``store_path`` (a folder or an object-store URL)."""
    from sweepshell.store.location import is_url

    if is_url(store_path):
        from sweepshell.engine.object_claims import ObjectClaimBook

        return ObjectClaimBook(store_path, ttl)
    return ClaimBook(store_path, ttl)


def remove_stale_claims(store_path: str | os.PathLike[str], ttl: float = 60.0) -> int:
    """Remove claims of runners that are gone (and the folder when empty); return how many.

    A killed runner leaves its claims behind; once the store is complete nobody takes them over,
    and zarr would warn about the folder on every open.
    """
    from sweepshell.store.leftovers import stale_claim_files
    from sweepshell.store.location import as_path

    stale = stale_claim_files(store_path, ttl)
    for claim in stale:
        claim.unlink(missing_ok=True)
    with contextlib.suppress(OSError):
        (as_path(store_path) / CLAIMS_DIR).rmdir()
    return len(stale)
