"""sweepshell: parameter sweeps of validated reduced-order buckling models, stored as zarr.

Heavy modules (xarray, zarr, dask) are imported only when a function that needs them is
called, so that ``import sweepshell`` and the command line start quickly.
"""

from __future__ import annotations

from typing import Any

from sweepshell.about import CAUTION, __version__

__all__ = ["CAUTION", "__version__", "get_model", "open_sweep", "run_sweep"]


def __getattr__(name: str) -> Any:
    if name == "open_sweep":
        import sweepshell.query.accessor  # noqa: F401  (registers the ``ds.sweep`` accessor)
        from sweepshell.store.reader import open_sweep
        return open_sweep
    if name == "run_sweep":
        from sweepshell.config.sweep import run_sweep
        return run_sweep
    if name == "get_model":
        from sweepshell.models import get_model
        return get_model
    raise AttributeError(f"module 'sweepshell' has no attribute {name!r}")
