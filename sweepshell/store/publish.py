"""Move a store built in a temporary folder into place atomically, on a local disk or an object store.

A store is built (template, or a whole merged store) in a local temporary folder, then published:

- **Local or mounted folder**: the temporary folder ``NAME.sweepshell-tmp-PID`` sits beside the target
  and is renamed onto it (one atomic rename; only one of two racing creators wins).
- **Object store** (no rename): the creator first writes ``NAME/.sweepshell-creating`` with a
  create-if-absent write (only one creator wins), uploads every object of the store except the root
  ``zarr.json``, uploads the root last and removes the marker. Readers (sweepshell and plain xarray)
  open a store through its root document, so none sees a half-made one. A creation killed before
  its root was written leaves a prefix with the marker and no root: the next run (or
  ``catalog --clean``) clears it once the creator's process is gone or the marker is older than
  :data:`STALE_SECONDS`.
"""

from __future__ import annotations

import json
import os
import shutil
import socket
import tempfile
import time
from pathlib import Path

from sweepshell.errors import StoreSchemaError
from sweepshell.store import metadata
from sweepshell.store.liveness import is_process_gone
from sweepshell.store.location import AnyPath, ObjectPath, StorePath, as_path
from sweepshell.store.objectpath import NoConditionalWrites

__all__ = ["CREATING_MARKER", "STALE_SECONDS", "clean_stale_temporaries", "creation_abandoned", "publish_template",
           "temporary_folder"]

#: object written first and removed last while a store is uploaded to an object store
CREATING_MARKER = ".sweepshell-creating"
#: age after which a creation marker whose creator cannot be checked counts as abandoned
STALE_SECONDS = 120.0


def temporary_folder(target: StorePath) -> Path:
    """Return an empty local folder to build the store for ``target`` in."""
    if isinstance(target, ObjectPath):
        return Path(tempfile.mkdtemp(prefix="sweepshell-")) / target.name
    target.parent.mkdir(parents=True, exist_ok=True)
    tmp = target.with_name(target.name + metadata.TEMP_SUFFIX + f"-{os.getpid()}")
    if tmp.exists():
        shutil.rmtree(tmp)
    return tmp


def publish_template(tmp: Path, target: StorePath) -> bool:
    """Move the store built in ``tmp`` to ``target``; return False when another creator got there first.

    ``tmp`` is removed in both cases.
    """
    try:
        if isinstance(target, ObjectPath):
            return _upload(tmp, target)
        try:
            os.rename(tmp, target)
        except OSError:
            if not metadata.is_store(target):
                raise
            return False
        return True
    finally:
        shutil.rmtree(tmp if not isinstance(target, ObjectPath) else tmp.parent, ignore_errors=True)


def _upload(tmp: Path, target: ObjectPath) -> bool:
    marker = target / CREATING_MARKER
    record = json.dumps({"runner": f"{socket.gethostname()}:{os.getpid()}", "started": time.time()}).encode()
    if metadata.has_node(target):
        return False
    if target.find():  # a creation in progress, one that finished since the check above, or foreign objects
        if marker.exists():
            return _wait_for_other(target)
        if metadata.has_node(target):  # the other creator published its root and removed its marker meanwhile
            return False
        raise StoreSchemaError(f"store.path={str(target)!r} holds objects that are not a sweepshell store; "
                               "choose another path", field="store.path", value=str(target))
    try:
        won = marker.create_exclusive(record)
    except NoConditionalWrites:  # no conditional writes: the last creator's template wins, all are equal
        marker.write_bytes(record)
        won = True
    if not won:
        return _wait_for_other(target)
    files = sorted(f for f in tmp.rglob("*") if f.is_file() and f != tmp / metadata.META_FILE)
    fs = target.fs
    fs.put([str(f) for f in files], [f"{target.key}/{f.relative_to(tmp).as_posix()}" for f in files])
    fs.put_file(str(tmp / metadata.META_FILE), f"{target.key}/{metadata.META_FILE}")  # the store exists from here
    marker.unlink(missing_ok=True)
    return True


def _wait_for_other(target: ObjectPath, timeout: float = STALE_SECONDS + 30.0) -> bool:
    """Wait while another creator uploads the store; clear its leftovers and say so if it died."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if metadata.has_node(target):
            return False
        if clean_stale_temporaries(target):
            break
        time.sleep(0.5)
    raise StoreSchemaError(f"another run was creating {str(target)!r} and stopped; run the same command again",
                           field="store.path", value=str(target))


def _creator_gone(marker: ObjectPath) -> bool:
    try:
        record = json.loads(marker.read_text())
        host, pid = str(record["runner"]).rsplit(":", 1)
    except (OSError, ValueError, KeyError, TypeError):
        return marker.exists() and marker.age() > STALE_SECONDS
    if is_process_gone(host, pid):
        return True
    return marker.age() > STALE_SECONDS


def creation_abandoned(target: ObjectPath) -> bool:
    """Whether an upload of a store to ``target`` started and its creator is gone."""
    marker = target / CREATING_MARKER
    return marker.exists() and _creator_gone(marker)


def clean_stale_temporaries(path: AnyPath) -> bool:
    """Remove half-built stores left by runs killed while creating ``path``; return whether one was removed."""
    target = as_path(path)
    if isinstance(target, ObjectPath):
        if not creation_abandoned(target):
            return False
        if metadata.has_node(target):  # the root made it: only the marker is left over
            (target / CREATING_MARKER).unlink(missing_ok=True)
        else:
            target.rmtree()
        return True
    removed = False
    for tmp in target.parent.glob(target.name + metadata.TEMP_SUFFIX + "-*"):
        pid_text = tmp.name.rsplit("-", 1)[-1]
        if pid_text.isdigit() and not is_process_gone(socket.gethostname(), pid_text):
            continue
        shutil.rmtree(tmp, ignore_errors=True)
        removed = True
    return removed
