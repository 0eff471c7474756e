"""Questions to a store, read only: selections, regimes, boundaries (new evaluations come from the caller).

The ``.sweep`` accessor on :class:`xarray.Dataset` (registered by ``import sweepshell``, so by
importing this package too) asks these questions through :class:`SweepQueries`.
"""

from __future__ import annotations

from sweepshell.query.accessor import SweepQueries
from sweepshell.query.expression import GRAMMAR, check_expression, evaluate_where
from sweepshell.query.table import SweepFields, describe_fields, load_table, select_points, to_records

__all__ = [
    "GRAMMAR",
    "SweepFields",
    "SweepQueries",
    "check_expression",
    "describe_fields",
    "evaluate_where",
    "load_table",
    "select_points",
    "to_records",
]
