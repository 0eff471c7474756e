"""Block claims on an object store: conditional create-if-absent writes and leases recorded in the claim.

Object stores have no rename and no modification time a runner could refresh, so a claim is an
object ``.claims/block-I-J.gN.claim`` holding its runner and ``lease_until`` (seconds since the
epoch). A runner claims a free block by creating generation 0 with a create-if-absent write (only
one writer succeeds); while it computes, it rewrites its claim with a later lease (the heartbeat).
A claim whose lease ran out, or whose runner's process is gone from this host, is taken over by
creating the next generation, again create-if-absent, so of several runners noticing the same
abandoned claim exactly one wins. The newest generation holds the block.

Where the object store does not honour conditional writes (a probe at start creates one object
twice), claims cannot keep runners apart: the book says so once and claims every block, which is
safe for one runner per store.
"""

from __future__ import annotations

import contextlib
import json
import logging
import os
import socket
import time
import uuid

from sweepshell.engine.claims import CLAIMS_DIR, ClaimBook
from sweepshell.store.leftovers import claim_is_stale
from sweepshell.store.location import ObjectPath, as_path
from sweepshell.store.objectpath import NoConditionalWrites

__all__ = ["ObjectClaimBook"]

log = logging.getLogger(__name__)


class ObjectClaimBook(ClaimBook):
    """The claims of one runner on one store on an object store (same interface as :class:`ClaimBook`).

    Parameters
    ----------
    store_path
        The store's URL.
    ttl
        Lease length in seconds; the runner renews its leases every ``ttl/4``.
    """

    def __init__(self, store_path: str | os.PathLike[str], ttl: float = 60.0) -> None:
        loc = as_path(store_path)
        assert isinstance(loc, ObjectPath)
        self.prefix = loc / CLAIMS_DIR
        self.ttl = ttl
        self.runner = f"{socket.gethostname()}:{os.getpid()}:{uuid.uuid4().hex[:8]}"
        self.held: set[tuple[int, ...]] = set()
        self.generation: dict[tuple[int, ...], int] = {}
        self.taken_over = 0
        self.coordinated = self._probe()
        if not self.coordinated:
            log.warning("%s does not honour conditional writes: several runners on this store cannot be kept "
                        "apart; run one runner per store", loc)

    def _probe(self) -> bool:
        probe = self.prefix / f"probe-{uuid.uuid4().hex}"
        try:
            first = probe.create_exclusive(b"1")
            second = probe.create_exclusive(b"2")
        except NoConditionalWrites:
            return False
        finally:
            probe.unlink(missing_ok=True)
        return first and not second

    def _key(self, index: tuple[int, ...], generation: int) -> ObjectPath:
        return self.prefix / ("block-" + "-".join(map(str, index)) + f".g{generation}.claim")

    def _record(self) -> bytes:
        return json.dumps({"runner": self.runner, "claimed": time.time(),
                           "lease_until": time.time() + self.ttl}).encode()

    def _generations(self, index: tuple[int, ...]) -> list[int]:
        stem = "block-" + "-".join(map(str, index)) + ".g"
        found = []
        for claim in self.prefix.glob(stem + "*.claim"):
            text = claim.name[len(stem):-len(".claim")]
            if text.isdigit():
                found.append(int(text))
        return sorted(found)

    def try_claim(self, index: tuple[int, ...]) -> bool:
        """Claim a block; return False if a live runner holds it."""
        if not self.coordinated:
            self.held.add(index)
            return True
        generations = self._generations(index)
        nxt = 0
        if generations:
            newest = generations[-1]
            try:
                record = json.loads(self._key(index, newest).read_text())
            except FileNotFoundError:  # released meanwhile: the next generation is free
                record = None
            except (OSError, ValueError):
                record = {"lease_until": time.time() + self.ttl, "runner": "?:?:?"}  # being written: respect it
            if record is not None and not claim_is_stale(record):
                return False
            nxt = newest + 1
        if not self._key(index, nxt).create_exclusive(self._record()):
            return False
        self.held.add(index)
        self.generation[index] = nxt
        if generations:
            self.taken_over += 1
            for old in generations:
                self._key(index, old).unlink(missing_ok=True)
        return True

    def heartbeat(self) -> None:
        """Renew the lease of every claim this runner holds."""
        for index in list(self.held):
            if index in self.generation:
                with contextlib.suppress(OSError):
                    self._key(index, self.generation[index]).write_bytes(self._record())

    def release(self, index: tuple[int, ...]) -> None:
        """Drop the claim of a block (after its status was written, or when giving it up)."""
        if index in self.held:
            self.held.discard(index)
            generation = self.generation.pop(index, None)
            if generation is not None:
                self._key(index, generation).unlink(missing_ok=True)

    def release_all(self) -> None:
        """Drop every claim (an empty prefix needs no removal)."""
        for index in list(self.held):
            self.release(index)
