"""Whether the process behind a claim, a creation marker or a temporary folder is gone.

Claims, creation markers and half-built stores name the process that made them (its host and
process id). Only a process on this host can be checked; anywhere else the caller falls back on
ages (heartbeats, leases).
"""

from __future__ import annotations

import os
import socket

__all__ = ["is_process_gone"]


def is_process_gone(host: str, pid: str | int) -> bool:
    """Return whether process ``pid`` of ``host`` is known to no longer exist.

    Parameters
    ----------
    host
        The host name recorded with the process (``socket.gethostname()`` of its maker).
    pid
        Its process id, as recorded (text or integer).

    Returns
    -------
    bool
        ``True`` only for a process of this host that the system says does not exist. ``False``
        for a live process, one that belongs to another user (the signal is refused), another
        host's process, or a process id that is not a non-negative integer: none of those can be
        called gone.
    """
    text = str(pid)
    if host != socket.gethostname() or not text.isdigit():
        return False
    try:
        os.kill(int(text), 0)
    except ProcessLookupError:
        return True
    except (PermissionError, OverflowError):  # another user's process, or an id no process can have
        return False
    return False
