"""Set-up of local worker processes (a dask preload): Ctrl-C belongs to the runner.

A Ctrl-C in a terminal reaches every process of the foreground group, worker processes
included; each would print a KeyboardInterrupt traceback before the runner's tidy message.
Worker processes therefore ignore SIGINT: the runner stops, releases its claims and closes
the cluster, which ends the workers.
"""

from __future__ import annotations

import signal
import threading
from typing import Any

__all__ = ["dask_setup"]


def dask_setup(worker: Any) -> None:
    """Ignore SIGINT in this worker process (called by dask when the worker starts)."""
    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGINT, signal.SIG_IGN)
