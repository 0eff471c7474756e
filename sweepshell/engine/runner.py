"""Run a plan: create or reopen the store, find unfinished blocks, compute them on dask.

Resume is the normal case: the ledger says which blocks are final, and only the others are
submitted. Interrupting (Ctrl-C) cancels outstanding blocks; blocks whose status was not
written are simply recomputed by the next run.
"""

from __future__ import annotations

import contextlib
import logging
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from sweepshell.engine.blas_threads import one_blas_thread
from sweepshell.engine.claims import ClaimBook, open_claims, remove_stale_claims
from sweepshell.engine.executors import (
    check_scheduler_reachable,
    dashboard_link,
    describe_outside_fault,
    start_client_early,
)
from sweepshell.engine.inprocess import drive_in_process, finish_block, recheck_held_elsewhere, take_block
from sweepshell.engine.observers import RunObserver, SilentObserver
from sweepshell.engine.reuse import Donor, find_donors
from sweepshell.engine.worker import compute_block
from sweepshell.errors import RunStoppedError
from sweepshell.models import make_model
from sweepshell.models.base import Status, SweepModel
from sweepshell.plan import Block, SweepPlan, choose_block_shape, iter_blocks
from sweepshell.store.chunk_checks import find_blocks_missing_chunks
from sweepshell.store.integrity import check_store_metadata
from sweepshell.store.location import absolute_store_path, as_path, zarr_store
from sweepshell.store.metadata import REGIME_VAR, STATUS_VAR, has_node, is_store
from sweepshell.store.reader import read_ledger
from sweepshell.store.writer import (
    check_store_matches,
    clean_stale_temporaries,
    create_store,
    store_block_shape,
    store_exists,
)

__all__ = [
    "RunSummary",
    "SweepInterrupted",
    "prepare_store",
    "refine_plan_store",
    "run_plan",
    "run_sweep",
]

log = logging.getLogger(__name__)


class SweepInterrupted(KeyboardInterrupt):
    """The run was stopped by the user; the store is consistent and the run resumable."""

    def __init__(self, summary: RunSummary) -> None:
        super().__init__("interrupted")
        self.summary = summary


@dataclass(frozen=True)
class RunSummary:
    """What a run did.

    Attributes
    ----------
    store_path
        The store written.
    total
        Points in the sweep.
    counts
        Status name → number of points in the whole store after the run.
    computed
        Points finished by this run (0 if the store was already complete), including reused ones.
    reused
        Points of ``computed`` copied from compatible stores instead of solved.
    blocks
        Blocks computed by this run.
    wall_seconds
        Wall time of the run, including start-up of workers.
    model_seconds
        Time spent inside the model, summed over workers.
    extra
        ``executor`` (``"in-process"`` when no cluster was started, else the executor kind; absent when nothing
        was computed), ``by_other_runners``, ``damaged_blocks``.
    """

    store_path: str
    total: int
    counts: dict[str, int]
    computed: int
    blocks: int
    wall_seconds: float
    model_seconds: float = 0.0
    reused: int = 0
    extra: dict[str, Any] = field(default_factory=dict)

    @property
    def complete(self) -> bool:
        return self.counts.get(Status.pending.name, 0) == 0

    def to_line(self) -> str:
        """Return the one-line summary printed at the end of a run."""
        c = self.counts
        parts = [f"{c.get(s.name, 0)} {s.name}" for s in Status if s is not Status.pending and c.get(s.name, 0)]
        if c.get("pending"):
            parts.append(f"{c['pending']} pending")
        done = "nothing to compute, store already complete" if self.computed == 0 and self.complete else \
            f"computed {self.computed} points in {self.wall_seconds:.1f} s"
        if self.reused:
            done += f" ({self.reused} reused from other stores)"
        if self.extra.get("damaged_blocks"):
            done += f" ({self.extra['damaged_blocks']} blocks recomputed because chunks were missing)"
        return f"{done}: {self.total} points ({', '.join(parts) or 'none'}) -> {self.store_path}"


def prepare_store(plan: SweepPlan, model: SweepModel | None = None) -> tuple[tuple[int, ...], bool]:
    """Check or create the store of ``plan``; return its block shape and whether it was new."""
    model = model or make_model(plan.model, plan.settings)
    path = plan.store_path
    clean_stale_temporaries(path)  # a creation killed midway (on an object store: a prefix with no root)
    if store_exists(path):
        if has_node(path):
            check_store_metadata(path)  # a damaged store: one line naming the problem and `verify --repair`
        check_store_matches(path, plan, model)
        return store_block_shape(path), False
    block_shape = choose_block_shape(plan.shape, plan.block_points)
    create_store(plan, model, block_shape)
    return (store_block_shape(path) if is_store(path) else block_shape), True


def _counts(ledger: np.ndarray) -> dict[str, int]:
    raw = np.bincount(ledger.reshape(-1), minlength=len(Status))
    return {s.name: int(raw[s.value]) for s in Status}


def run_plan(plan: SweepPlan, *, observer: RunObserver | None = None, claim_ttl: float = 60.0,
             client: Any = None) -> RunSummary:
    """Compute every unfinished block of ``plan`` and return a summary.

    ``client`` is an existing :class:`distributed.Client` to compute on (its workers must
    reach the store's path); by default the plan's executor starts one, closed at the end.
    Several runners may work on one store at once: each block is claimed before it is
    submitted (see :mod:`sweepshell.engine.claims`), and blocks claimed by a live runner
    are left to it and picked up from the ledger when they are done.

    Raises
    ------
    SweepInterrupted
        On Ctrl-C; the store stays consistent and a new run resumes it.
    """
    observer = observer or SilentObserver()
    t0 = time.perf_counter()
    path = plan.store_path
    model = make_model(plan.model, plan.settings)
    if plan.executor.kind == "distributed":
        check_scheduler_reachable(plan.executor.address)  # before anything is written
    existing = store_exists(path)
    # an existing store is checked (a store of another sweep is refused) before anything starts
    block_shape: tuple[int, ...] = prepare_store(plan, model)[0] if existing else ()
    tally: dict[str, Any] = {"model_seconds": 0.0, "computed": 0, "blocks": 0, "by_others": 0, "reused": 0,
                             "damaged": 0}
    claims: ClaimBook | None = None
    # blocks computed in this process (executor auto's small work, the threads executor, a caller's
    # client) use one BLAS thread; auto decides only later, and the limit costs nothing when its work
    # goes to worker processes. It is set before start_client_early starts its thread (see blas_threads)
    here = client is not None or plan.executor.kind in ("auto", "threads")
    try:
        with one_blas_thread() if here else contextlib.nullcontext(), start_client_early(plan, client) as get_client:
            if not existing:
                block_shape, _ = prepare_store(plan, model)
            ledger = read_ledger(path, block_shape)
            tally["damaged"] = _reset_blocks_missing_chunks(path, ledger, block_shape, model)
            pending = [b for b in iter_blocks(plan.shape, block_shape)
                       if np.any(ledger[b.slices] == Status.pending)]
            if not pending:
                remove_stale_claims(path, claim_ttl)  # a complete store keeps no claims of dead runners
                return RunSummary(store_path=path, total=plan.n_points, counts=_counts(ledger), computed=0,
                                  blocks=0, wall_seconds=time.perf_counter() - t0)
            to_compute = sum(b.n_points for b in pending)
            claims = open_claims(path, ttl=claim_ttl)
            donors = find_donors(plan, model) if plan.reuse else []
            note = "compiling the model's kernels (once); the ETA follows the first computed blocks" \
                if model.kernels_to_compile() else ""
            # a caller's client is used as given; otherwise executor auto computes small work here
            in_process = client is None and plan.executor.runs_in_process(plan.estimated_seconds(to_compute))
            _compute(plan, None if in_process else get_client, pending, claims, observer, tally, donors, note)
    except KeyboardInterrupt:
        if claims is None or not block_shape:
            raise

        uncounted = set(claims.held)  # claimed, maybe written, never counted (e.g. a result not yet collected)
        claims.release_all()
        observer.close()
        summary = _final_summary(plan, block_shape, tally, t0, uncounted)
        raise SweepInterrupted(summary) from None
    except Exception as exc:
        cause = describe_outside_fault(exc)
        if cause is None:
            raise
        if claims is not None:
            claims.release_all()
        observer.close()
        raise RunStoppedError(f"the run stopped: {cause}; the store is consistent, run the same command again to "
                              "continue", field="store", value=path) from None
    assert claims is not None
    claims.release_all()
    remove_stale_claims(path, claim_ttl)
    observer.close()
    return _final_summary(plan, block_shape, tally, t0)


def _compute(plan: SweepPlan, get_client: Callable[[], Any] | None, pending: list[Block], claims: ClaimBook,
             observer: RunObserver, tally: dict[str, Any], donors: list[Donor], note: str) -> None:
    """Compute the pending blocks on the dask client, or in this process when ``get_client`` is ``None``."""
    to_compute = sum(b.n_points for b in pending)
    tally["executor"] = "in-process" if get_client is None else plan.executor.kind
    log.info("%s", plan.describe_executor(to_compute))
    if get_client is None:
        observer.start(plan.n_points, plan.n_points - to_compute, to_compute, note=note)
        drive_in_process(plan, pending, claims, observer, tally, donors)
        return
    active = get_client()
    link = dashboard_link(active)
    if link:
        log.info("dask dashboard: %s", link)
    observer.connected(link)
    observer.start(plan.n_points, plan.n_points - to_compute, to_compute, note=note)
    _drive(active, plan, pending, claims, observer, tally, donors)


def _reset_blocks_missing_chunks(path: str, ledger: np.ndarray, block_shape: tuple[int, ...],
                                 model: SweepModel) -> int:
    """Set final blocks that lost an output or regime chunk back to pending (in ``ledger`` and on disk).

    Found by listing the array folders (no values are read); the ledger chunk is rewritten whole, as
    ``verify --repair`` does, so the block is recomputed like any unfinished one. Returns the number of
    blocks reset.
    """
    names = [out.name for out in model.outputs] + [REGIME_VAR]
    lost = find_blocks_missing_chunks(path, ledger, block_shape, names)
    if not lost:
        return 0
    import zarr

    arr: Any = zarr.open_array(zarr_store(as_path(path) / STATUS_VAR), mode="r+", zarr_format=3)
    for block in iter_blocks(tuple(ledger.shape), block_shape):
        if block.index in lost:
            log.info("block %s of %s lost its %s chunk(s); recomputing it", list(block.index), path,
                        ", ".join(lost[block.index]))
            arr[block.slices] = np.zeros(block.shape, dtype=np.uint8)
            ledger[block.slices] = 0
    return len(lost)


def _drive(client: Any, plan: SweepPlan, pending: list[Block], claims: ClaimBook, observer: RunObserver,
           tally: dict[str, Any], donors: list[Donor]) -> None:
    """Submit claimed blocks, a few per worker at a time, until every block is final."""
    from distributed import wait

    path = plan.store_path
    axis_values = [a.to_array() for a in plan.axes]
    slots = max(2, 2 * sum(client.nthreads().values()))
    waiting = list(pending)           # not yet submitted by us
    in_flight: dict[Any, Block] = {}
    last_beat = time.monotonic()
    heartbeat = max(0.5, claims.ttl / 4)
    try:
        while waiting or in_flight:
            held_elsewhere: list[Block] = []
            while waiting and len(in_flight) < slots:
                block = waiting.pop(0)
                taken = take_block(block, path, claims, observer, tally)
                if taken is False:
                    held_elsewhere.append(block)
                if not taken:
                    continue
                future = client.submit(
                    compute_block, absolute_store_path(path), plan.model, plan.settings, plan.axis_names,
                    [v[s] for v, s in zip(axis_values, block.slices, strict=True)], plan.fixed, block, donors,
                    key=f"sweepshell-block-{'-'.join(map(str, block.index))}-{claims.runner}", pure=False,
                    store_options=plan.store_options or None)
                in_flight[future] = block
            waiting += recheck_held_elsewhere(path, held_elsewhere, observer, tally)  # others' blocks: retry later
            if not in_flight:
                time.sleep(min(1.0, heartbeat))
            else:
                try:
                    done, _ = wait(list(in_flight), timeout=heartbeat, return_when="FIRST_COMPLETED")
                except TimeoutError:  # nothing finished yet: beat the claims and wait again
                    done = set()
                for future in done:
                    block = in_flight.pop(future)
                    finish_block(block, future.result(), claims, observer, tally)
            if time.monotonic() - last_beat >= heartbeat:
                claims.heartbeat()
                last_beat = time.monotonic()
    except KeyboardInterrupt:
        client.cancel(list(in_flight))
        raise


def _final_summary(plan: SweepPlan, block_shape: tuple[int, ...], tally: dict[str, Any], t0: float,
                   uncounted: set[tuple[int, ...]] | None = None) -> RunSummary:
    """Summarise the run from the store's ledger and the tally.

    ``uncounted`` are the indices of blocks this runner still held claims on when it was
    interrupted: those the ledger holds final were written by this run (its workers or itself) and
    count as computed, though their results were never collected.
    """
    ledger = read_ledger(plan.store_path, block_shape)
    held = uncounted or set()
    for block in iter_blocks(plan.shape, block_shape) if held else ():
        if block.index in held and not np.any(ledger[block.slices] == Status.pending):
            tally["computed"] += block.n_points
            tally["blocks"] += 1
    return RunSummary(store_path=plan.store_path, total=plan.n_points, counts=_counts(ledger),
                      computed=tally["computed"], blocks=tally["blocks"], wall_seconds=time.perf_counter() - t0,
                      model_seconds=tally["model_seconds"], reused=tally["reused"],
                      extra={"by_other_runners": tally["by_others"], "damaged_blocks": tally["damaged"],
                             "executor": tally.get("executor")})


def run_sweep(plan: SweepPlan, *, observer: RunObserver | None = None, client: Any = None) -> RunSummary:
    """Run a planned sweep, then the refinement it asks for; running it again resumes it.

    Loading a sweep by name or file is the config layer's job
    (:func:`sweepshell.config.sweep.run_sweep`, also ``sweepshell.run_sweep``). ``client`` is an existing
    :class:`distributed.Client` to run on (left open); the plan's executor otherwise.
    """
    summary = run_plan(plan, observer=observer, client=client)
    if plan.refine and summary.complete:
        refine_plan_store(plan)
    return summary


def refine_plan_store(plan: SweepPlan) -> Any:
    """Run the refinement a plan asks for on its (complete) store; return the refinement summary."""
    from sweepshell.engine.refine import refine_store

    assert plan.refine is not None
    return refine_store(plan.store_path, x=plan.refine["x"], y=plan.refine["y"], levels=plan.refine["levels"])
