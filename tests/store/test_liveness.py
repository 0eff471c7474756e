"""One check of whether a recorded process is gone, shared by claims, leftovers and store creation."""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys

import pytest

from sweepshell.engine.claims import ClaimBook
from sweepshell.store.leftovers import leftover_temporaries
from sweepshell.store.liveness import is_process_gone
from sweepshell.store.metadata import TEMP_SUFFIX
from sweepshell.store.publish import clean_stale_temporaries

HOST = socket.gethostname()


@pytest.fixture(scope="module")
def dead_pid() -> int:
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()
    return proc.pid


def test_alive_dead_other_host_and_unreadable(dead_pid: int) -> None:
    assert not is_process_gone(HOST, os.getpid())
    assert not is_process_gone(HOST, str(os.getpid()))
    assert is_process_gone(HOST, dead_pid)
    assert is_process_gone(HOST, str(dead_pid))
    assert not is_process_gone(HOST + "-elsewhere", dead_pid)  # another host's process cannot be checked
    for unreadable in ("", "abc", "-5", "12x", " 7", str(2**80)):  # 2**80: os.kill overflows
        assert not is_process_gone(HOST, unreadable)


def test_another_users_process_is_not_gone(monkeypatch: pytest.MonkeyPatch) -> None:
    def refuse(pid: int, sig: int) -> None:
        raise PermissionError(1, "Operation not permitted")

    monkeypatch.setattr(os, "kill", refuse)
    assert not is_process_gone(HOST, 1)


def test_callers_agree(tmp_path, dead_pid: int) -> None:
    """Claims, leftovers and store creation take the same process for gone, and the same for alive."""
    target = tmp_path / "s.zarr"
    for pid in (dead_pid, os.getpid()):
        (tmp_path / f"s.zarr{TEMP_SUFFIX}-{pid}").mkdir()
    assert [p.name for p in leftover_temporaries(tmp_path)] == [f"s.zarr{TEMP_SUFFIX}-{dead_pid}"]
    assert clean_stale_temporaries(target)
    assert [p.name for p in tmp_path.iterdir()] == [f"s.zarr{TEMP_SUFFIX}-{os.getpid()}"]

    store = tmp_path / "claims.zarr"
    store.mkdir()
    book = ClaimBook(store, ttl=3600.0)
    for index, pid in (((0,), dead_pid), ((1,), os.getpid())):
        (book.folder / f"block-{index[0]}.claim").write_text(json.dumps({"runner": f"{HOST}:{pid}:abcd"}))
    assert book.try_claim((0,))      # its holder is gone: taken over at once
    assert not book.try_claim((1,))  # held by a live process, heartbeat fresh
