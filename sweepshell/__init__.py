"""sweepshell: parameter sweeps of validated reduced-order buckling models, stored as zarr.

Heavy modules (xarray, zarr, dask) are imported only when a function that needs them is
called, so that ``import sweepshell`` and the command line start quickly. The ``.sweep``
accessor on xarray Datasets is registered by ``import sweepshell``: at once when xarray is
already imported, otherwise as soon as it is.
"""

from __future__ import annotations

import importlib.util
import sys
from typing import Any

from sweepshell.about import CAUTION, __version__

__all__ = ["CAUTION", "__version__", "get_model", "open_sweep", "run_sweep"]


class _SweepAccessorOnFirstUse:
    """Stands in for :class:`sweepshell.plot.accessor.SweepAccessor` until ``ds.sweep`` is first used.

    Registering it needs nothing but xarray, so registration can happen while xarray itself is
    being imported; the query and plot layers load on first use.
    """

    def __new__(cls, ds: Any) -> Any:
        from sweepshell.plot.accessor import SweepAccessor

        return SweepAccessor(ds)


def _register_accessor() -> None:
    """Register the ``.sweep`` accessor on :class:`xarray.Dataset` (once; xarray is loaded by then)."""
    import xarray as xr

    if not hasattr(xr.Dataset, "sweep"):
        xr.register_dataset_accessor("sweep")(_SweepAccessorOnFirstUse)


class _AccessorOnXarrayImport:
    """A one-shot import hook: once xarray has been executed, register the ``.sweep`` accessor."""

    def find_spec(self, fullname: str, path: Any = None, target: Any = None) -> Any:
        if fullname != "xarray":
            return None
        if self in sys.meta_path:
            sys.meta_path.remove(self)
        spec = importlib.util.find_spec(fullname)
        loader = getattr(spec, "loader", None)
        if spec is None or loader is None or not hasattr(loader, "exec_module"):
            return spec
        run = loader.exec_module

        def exec_module(module: Any) -> None:
            run(module)
            try:
                _register_accessor()
            except Exception:  # a convenience: never break the caller's import of xarray
                import logging

                logging.getLogger(__name__).warning("the .sweep accessor could not be registered", exc_info=True)

        loader.exec_module = exec_module
        return spec


if "xarray" in sys.modules:
    _register_accessor()
elif not any(isinstance(f, _AccessorOnXarrayImport) for f in sys.meta_path):
    sys.meta_path.insert(0, _AccessorOnXarrayImport())  # type: ignore[arg-type]


def __getattr__(name: str) -> Any:
    if name == "open_sweep":
        from sweepshell.store.reader import open_sweep

        _register_accessor()
        return open_sweep
    if name == "run_sweep":
        from sweepshell.config.sweep import run_sweep
        return run_sweep
    if name == "get_model":
        from sweepshell.models import get_model
        return get_model
    raise AttributeError(f"module 'sweepshell' has no attribute {name!r}")
