"""The dask executors of a run: local processes, threads or a distributed scheduler, and their faults."""

from __future__ import annotations

import contextlib
import errno
import logging
import os
from collections.abc import Callable, Iterator
from typing import Any

from sweepshell.errors import ConfigError
from sweepshell.plan import ExecutorSpec, SweepPlan
from sweepshell.store.writer import store_exists

__all__ = ["check_scheduler_reachable", "dashboard_link", "describe_outside_fault", "open_client", "start_client",
           "start_client_early"]

log = logging.getLogger("sweepshell.engine.runner")


@contextlib.contextmanager
def open_client(spec: ExecutorSpec) -> Iterator[Any]:
    """Yield a dask.distributed client for the executor spec and close what we started."""
    client, cluster = start_client(spec)
    try:
        yield client
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


def start_client(spec: ExecutorSpec) -> tuple[Any, Any]:
    """Return ``(client, cluster)``: the cluster is ours to close, ``None`` for an existing one."""
    import dask
    from distributed import Client, LocalCluster

    # a failed block is reported by the runner in one line; dask's own error log would add a traceback
    quiet = not log.isEnabledFor(logging.INFO)
    if quiet:
        logging.getLogger("distributed").setLevel(logging.CRITICAL)
    if spec.kind == "distributed":
        return Client(spec.address, timeout="20s"), None
    with dask.config.set({"logging.distributed": "critical" if quiet else "error"}):
        if spec.kind == "threads":
            cluster = LocalCluster(n_workers=1, threads_per_worker=spec.workers or 1, processes=False,
                                   dashboard_address=":0")
        else:
            # worker processes ignore Ctrl-C (sweepshell.engine.worker_setup): the runner handles it
            cluster = LocalCluster(n_workers=spec.workers or (os.cpu_count() or 1), threads_per_worker=1,
                                   processes=True, dashboard_address=":0",
                                   silence_logs=logging.CRITICAL if quiet else logging.ERROR,
                                   preload=["sweepshell.engine.worker_setup"])
    return Client(cluster), cluster


@contextlib.contextmanager
def start_client_early(plan: SweepPlan, given: Any = None) -> Iterator[Callable[[], Any]]:
    """Start the workers in the background while a new store's template is written.

    Yields a function returning the client (waiting for it); whatever was started is closed on exit. For an
    existing store nothing starts early: it may well be complete, and then no workers are needed. A ``given``
    client (the caller's) is used as it is and left open.
    """
    from concurrent.futures import ThreadPoolExecutor

    if given is not None:
        yield lambda: given
        return

    pool = ThreadPoolExecutor(1, thread_name_prefix="sweepshell-start")
    # a new store of small estimated work is computed in this process (executor auto): nothing starts early
    small = plan.executor.runs_in_process(plan.estimated_seconds())
    early = None if store_exists(plan.store_path) or small else pool.submit(start_client, plan.executor)
    started: list[tuple[Any, Any]] = []

    def get() -> Any:
        if not started:
            started.append(early.result() if early is not None else start_client(plan.executor))
        return started[0][0]

    try:
        yield get
    finally:
        if early is not None and not started:
            with contextlib.suppress(Exception):
                started.append(early.result())
        for client, cluster in started:
            client.close()
            if cluster is not None:
                cluster.close()
        pool.shutdown(wait=False)


def dashboard_link(client: Any) -> str | None:
    """Return the address of the dask dashboard of ``client``'s scheduler, or ``None`` when it serves none."""
    try:
        if "dashboard" not in client.scheduler_info().get("services", {}):
            return None
        return str(client.dashboard_link)
    except Exception:  # a dashboard is a convenience: never fail a run over it
        return None


_FULL_ERRNOS = {errno.ENOSPC: "the disk is full", errno.EFBIG: "a file reached the file-size limit",
                errno.EDQUOT: "the disk quota is exhausted"}


def describe_outside_fault(exc: BaseException) -> str | None:
    """Return what went wrong if ``exc`` is a fault outside sweepshell's input (disk, limits, scheduler)."""
    seen: set[int] = set()
    current: BaseException | None = exc
    while current is not None and id(current) not in seen:
        seen.add(id(current))
        if isinstance(current, OSError) and current.errno in _FULL_ERRNOS:
            where = f" writing {current.filename}" if current.filename else ""
            return f"{_FULL_ERRNOS[current.errno]}{where} (free space or raise the limit)"
        name = type(current).__name__
        if name in ("CommClosedError", "KilledWorker", "FutureCancelledError", "CancelledError") or (
                name in ("TimeoutError", "OSError") and "scheduler" in str(current).lower()):
            return f"the dask scheduler or its workers were lost ({name})"
        current = current.__cause__ or current.__context__
    return None


def check_scheduler_reachable(address: str | None, timeout: float = 5.0) -> None:
    """Raise a one-line :class:`ConfigError` unless a TCP connection to the scheduler opens within ``timeout`` s."""
    import socket
    from urllib.parse import urlsplit

    if not address:
        raise ConfigError("executor=distributed needs an address; add executor.address=tcp://HOST:PORT",
                          field="executor.address")
    parts = urlsplit(address if "://" in address else f"tcp://{address}")
    try:
        host, port = parts.hostname, parts.port
    except ValueError:
        host, port = None, None
    if parts.scheme not in ("tcp", "tls") or not host or not port:
        raise ConfigError(f"executor.address={address!r} is not a scheduler address; use tcp://HOST:PORT",
                          field="executor.address", value=address)
    try:
        with socket.create_connection((host, port), timeout=timeout):
            pass
    except OSError as exc:
        raise ConfigError(f"executor.address={address!r}: no scheduler answers ({exc.strerror or type(exc).__name__}"
                          f" within {timeout:g} s); start it (`dask scheduler`) or fix the address",
                          field="executor.address", value=address) from None
