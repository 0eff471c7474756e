"""Questions to a store, read only: selections, regimes, boundaries (new evaluations come from the caller).

Importing this package registers the ``.sweep`` accessor on :class:`xarray.Dataset`.
"""

from __future__ import annotations

from sweepshell.query.accessor import SweepAccessor
from sweepshell.query.expression import GRAMMAR, check_expression, evaluate_where
from sweepshell.query.table import SweepFields, describe_fields, load_table, select_points, to_records

__all__ = [
    "GRAMMAR",
    "SweepAccessor",
    "SweepFields",
    "check_expression",
    "describe_fields",
    "evaluate_where",
    "load_table",
    "select_points",
    "to_records",
]
