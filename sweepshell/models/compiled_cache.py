"""Where numba keeps the compiled kernels of the built-in models when their package folder is read-only.

Kernels are compiled with ``cache=True``: numba writes the machine code next to the source
(``__pycache__``) or, when that folder is read-only (a system-wide or container install), in the
user's cache folder (``$XDG_CACHE_HOME/numba`` or ``~/.cache/numba``). When neither can be written
and ``NUMBA_CACHE_DIR`` is unset, numba refuses to define a cached kernel at all. The registry
then points ``NUMBA_CACHE_DIR`` at a private folder of this user under the temporary folder
before a model's kernels are defined, so the model still imports and later processes (dask
workers inherit the variable) load what the first one compiled.

Numba's cache files are pickles: a folder anyone else could have written is never used. A shared
temporary folder is taken only when it belongs to this user and nobody else may write to it;
otherwise a fresh private folder serves this process alone (its kernels compile once per process).
"""

from __future__ import annotations

import os
import stat
import sys
import tempfile
from collections.abc import Mapping
from pathlib import Path

__all__ = ["choose_compiled_cache", "ensure_compiled_cache"]


def _writable(folder: Path) -> bool:
    """Whether a file can be created in ``folder`` (made if missing), as numba checks before caching there."""
    try:
        folder.mkdir(parents=True, exist_ok=True)
        with tempfile.TemporaryFile(dir=folder):
            pass
    except OSError:
        return False
    return True


def _private_folder(folder: Path) -> bool:
    """Whether ``folder`` exists (or is made) as a folder of this user alone, writable by nobody else."""
    try:
        folder.mkdir(mode=0o700, exist_ok=True)
        info = folder.lstat()
    except OSError:
        return False
    mine = not hasattr(os, "getuid") or info.st_uid == os.getuid()
    return stat.S_ISDIR(info.st_mode) and mine and not info.st_mode & (stat.S_IWGRP | stat.S_IWOTH) \
        and _writable(folder)


def choose_compiled_cache(source_dir: Path, environ: Mapping[str, str]) -> str | None:
    """Return the folder ``NUMBA_CACHE_DIR`` should name for kernels defined in ``source_dir``, or ``None``.

    ``None`` when numba finds a place of its own: ``NUMBA_CACHE_DIR`` is set, the source's
    ``__pycache__`` can be written, or the user's cache folder can.
    """
    if environ.get("NUMBA_CACHE_DIR"):
        return None
    if _writable(source_dir / "__pycache__"):
        return None
    user_cache = Path(environ.get("XDG_CACHE_HOME") or Path(environ.get("HOME") or "~").expanduser() / ".cache")
    if _writable(user_cache / "numba"):
        return None
    uid = os.getuid() if hasattr(os, "getuid") else "user"
    shared = Path(tempfile.gettempdir()) / f"sweepshell-numba-{uid}"
    if _private_folder(shared):
        return str(shared)
    return tempfile.mkdtemp(prefix="sweepshell-numba-")


def ensure_compiled_cache(source_dir: Path) -> None:
    """Point numba at a writable, private cache folder if it would find none for kernels in ``source_dir``."""
    folder = choose_compiled_cache(source_dir, os.environ)
    if folder is None:
        return
    os.environ["NUMBA_CACHE_DIR"] = folder  # read when numba is imported; dask worker processes inherit it
    config = sys.modules.get("numba.core.config")
    if config is not None:  # numba already imported: its locators read the setting when a kernel is defined
        config.CACHE_DIR = folder  # type: ignore[attr-defined]
