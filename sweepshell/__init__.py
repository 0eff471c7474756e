"""sweepshell: parameter sweeps of validated reduced-order buckling models, stored as zarr.

Heavy modules (xarray, zarr, dask) are imported only when a function that needs them is
called, so that ``import sweepshell`` and the command line start quickly.
"""

from __future__ import annotations

from typing import Any

__version__ = "0.1.0"

__all__ = ["CAUTION", "__version__", "get_model", "open_sweep", "run_sweep"]

#: the caution printed wherever critical loads are shown
CAUTION = (
    "Caution: sweepshell results come from reduced-order elastic models of perfect or "
    "idealised structures. Real shells are highly imperfection-sensitive: measured buckling "
    "loads can fall far below classical values, which is why design codes apply knock-down "
    "factors. Design must follow the applicable codes and standards and licensed engineering "
    "review; do not use these numbers alone to size a structure."
)


def __getattr__(name: str) -> Any:
    if name == "open_sweep":
        import sweepshell.query.accessor  # noqa: F401  (registers the ``ds.sweep`` accessor)
        from sweepshell.store.reader import open_sweep
        return open_sweep
    if name == "run_sweep":
        from sweepshell.engine.runner import run_sweep
        return run_sweep
    if name == "get_model":
        from sweepshell.models import get_model
        return get_model
    raise AttributeError(f"module 'sweepshell' has no attribute {name!r}")
