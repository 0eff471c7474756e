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


def _register_accessor() -> None:
    """Register the ``.sweep`` accessor (imports the query layer; xarray is loaded by then)."""
    try:
        import sweepshell.query.accessor  # noqa: F401
    except Exception:  # the accessor is a convenience: never break the caller's import of xarray
        import logging

        logging.getLogger(__name__).warning("the .sweep accessor could not be registered", exc_info=True)


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
            _register_accessor()

        loader.exec_module = exec_module
        return spec


if "xarray" in sys.modules:
    _register_accessor()
elif not any(isinstance(f, _AccessorOnXarrayImport) for f in sys.meta_path):
    sys.meta_path.insert(0, _AccessorOnXarrayImport())  # type: ignore[arg-type]


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
