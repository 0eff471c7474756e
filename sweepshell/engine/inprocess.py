"""Compute a sweep's blocks in the calling process: no scheduler, no worker processes.

Small sweeps (``executor.kind: auto`` with little estimated work) spend far less time in the
model than starting local workers costs. Here each pending block goes through the same steps
as on a dask worker: it is claimed, checked for having been finished by another runner, computed
and written by :func:`sweepshell.engine.worker.compute_block` (the one block writer), and its
claim released; the ledger, claims and progress therefore behave as in the dask drive loop, which
shares this module's block bookkeeping (:func:`take_block`, :func:`recheck_held_elsewhere`,
:func:`finish_block`).

A Ctrl-C stops the run after the block being computed (a second Ctrl-C at once), so the interrupt
lands in this module between blocks rather than inside a library's write; a kill at any instant
leaves unfinished blocks pending (a block's status is written last), and the next run resumes them.
"""

from __future__ import annotations

import contextlib
import signal
import threading
import time
from collections.abc import Iterator
from typing import Any

import numpy as np

from sweepshell.engine.claims import ClaimBook
from sweepshell.engine.observers import RunObserver
from sweepshell.engine.reuse import Donor
from sweepshell.engine.worker import compute_block
from sweepshell.models.base import Status
from sweepshell.plan import Block, SweepPlan
from sweepshell.store.location import absolute_store_path
from sweepshell.store.reader import is_block_final, read_ledger

__all__ = ["drive_in_process", "finish_block", "recheck_held_elsewhere", "take_block"]


def drive_in_process(plan: SweepPlan, pending: list[Block], claims: ClaimBook, observer: RunObserver,
                     tally: dict[str, Any], donors: list[Donor]) -> None:
    """Compute every pending block here, one after another, until every block is final.

    Blocks claimed by another live runner are left to it and looked at again after the others;
    ``tally`` and ``observer`` are updated as blocks finish.
    """
    with _interrupt_between_blocks() as stop_requested:
        _drive(plan, pending, claims, observer, tally, donors, stop_requested)


@contextlib.contextmanager
def _interrupt_between_blocks() -> Iterator[threading.Event]:
    """Turn the first Ctrl-C into a request honoured between blocks; a second one interrupts at once."""
    stop = threading.Event()
    if threading.current_thread() is not threading.main_thread():
        yield stop
        return

    def handler(signum: int, frame: object) -> None:
        if stop.is_set():
            raise KeyboardInterrupt
        stop.set()

    if signal.getsignal(signal.SIGINT) is signal.SIG_IGN:  # e.g. a background job: Ctrl-C is not ours to catch
        yield stop
        return
    previous = signal.signal(signal.SIGINT, handler)
    try:
        yield stop  # a request arriving after the last block changes nothing: the run is complete
    finally:
        signal.signal(signal.SIGINT, previous)


def finish_block(block: Block, info: dict[str, Any], claims: ClaimBook, observer: RunObserver,
                 tally: dict[str, Any]) -> None:
    """Release a computed block's claim and count it (points computed and reused, model time, progress)."""
    claims.release(block.index)
    tally["model_seconds"] += info["model_seconds"]
    tally["reused"] += info["reused"]
    tally["computed"] += info["points"]
    tally["blocks"] += 1
    observer.advance(info["points"])


def take_block(block: Block, store_path: str, claims: ClaimBook, observer: RunObserver,
               tally: dict[str, Any]) -> bool | None:
    """Claim a pending block for computing.

    Returns ``True`` when it is ours to compute, ``False`` when another live runner holds it (look again
    later with :func:`recheck_held_elsewhere`), ``None`` when another runner finished it since the ledger
    was read (released and counted).
    """
    if not claims.try_claim(block.index):
        return False
    if is_block_final(store_path, block):
        claims.release(block.index)
        tally["by_others"] += block.n_points
        observer.advance(block.n_points)
        return None
    return True


def recheck_held_elsewhere(store_path: str, held: list[Block], observer: RunObserver,
                           tally: dict[str, Any]) -> list[Block]:
    """Return the blocks of ``held`` (claimed by other runners) still pending; count the ones they finished."""
    if not held:
        return []
    ledger = read_ledger(store_path)
    still: list[Block] = []
    for block in held:
        if np.any(ledger[block.slices] == Status.pending):
            still.append(block)
        else:
            tally["by_others"] += block.n_points
            observer.advance(block.n_points)
    return still


def _drive(plan: SweepPlan, pending: list[Block], claims: ClaimBook, observer: RunObserver, tally: dict[str, Any],
           donors: list[Donor], stop_requested: threading.Event) -> None:
    path = absolute_store_path(plan.store_path)
    axis_values = [a.to_array() for a in plan.axes]
    heartbeat = max(0.5, claims.ttl / 4)
    last_beat = time.monotonic()
    waiting = list(pending)
    while waiting:
        held_elsewhere: list[Block] = []
        for block in waiting:
            if stop_requested.is_set():
                raise KeyboardInterrupt
            if time.monotonic() - last_beat >= heartbeat:
                claims.heartbeat()
                last_beat = time.monotonic()
            taken = take_block(block, plan.store_path, claims, observer, tally)
            if taken is False:
                held_elsewhere.append(block)
            if not taken:
                continue
            info = compute_block(path, plan.model, plan.settings, plan.axis_names,
                                 [v[s] for v, s in zip(axis_values, block.slices, strict=True)], plan.fixed, block,
                                 donors)
            finish_block(block, info, claims, observer, tally)
        waiting = recheck_held_elsewhere(plan.store_path, held_elsewhere, observer, tally)
        if waiting:  # another runner still has them: retry shortly
            stop_requested.wait(min(1.0, heartbeat))
            if time.monotonic() - last_beat >= heartbeat:
                claims.heartbeat()
                last_beat = time.monotonic()
