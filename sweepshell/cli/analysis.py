"""Commands that ask a store questions: ``query``, ``map``, ``boundary``, ``path``, ``report``, ``refine``.

Each command takes the parsed arguments and returns an exit code; bad input raises a
:class:`~sweepshell.errors.SweepshellError` that ``main`` prints as one line (exit 2).
pandas, xarray and matplotlib are imported inside the commands, so ``sweepshell --help``
stays fast.
"""

from __future__ import annotations

import argparse
import csv
import io
import json
import math
import sys
from typing import TYPE_CHECKING, Any

from sweepshell import CAUTION
from sweepshell.errors import QueryError

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["register"]

_WHERE_HELP = (
    "keep points where EXPR holds. Grammar: comparisons (< <= > >= == != , chains like 2 < x <= 5, "
    "`in [..]`, `not in [..]`) of axes, scalar outputs, regime, status and source, combined with and / or / "
    "not and parentheses; arithmetic + - * / ** % between numbers. regime and status compare by name "
    "(regime == \"buckled\"); source is \"grid\" or \"points\" (evaluated off the grid). Strings in double or "
    "single quotes. No calls, attribute access, indexing or other names: an expression never runs code. "
    "Example: --where 'stiffness_ratio > 5 and regime == \"buckled\"'"
)
_TABLE_LIMIT = 40


def register(subparsers: Any) -> None:
    """Add the analysis commands to the ``sweepshell`` parser."""
    q = subparsers.add_parser(
        "query", help="select points of a store (table, CSV or JSON)",
        description="Select points of a store: by default every point with a trustworthy status (ok, "
                    "no_instability), grid and refined points alike, with its axis values, scalar outputs and "
                    "regime. " + _WHERE_HELP.replace("keep points", "--where EXPR keeps points", 1),
        epilog="JSON is a list of objects, one per point, with the axis values and the requested fields "
               "(regime and status as names, missing values as null). The caution about critical loads goes "
               "to stderr, so stdout stays clean CSV/JSON.")
    q.add_argument("store", metavar="STORE")
    q.add_argument("--where", metavar="EXPR", help=_WHERE_HELP)
    q.add_argument("--fields", metavar="A,B", help="comma-separated fields besides the axes "
                   "(default: every scalar output and regime)")
    q.add_argument("--sort", metavar="FIELD", help="sort by FIELD; --sort=-FIELD sorts descending")
    q.add_argument("--limit", metavar="N", type=int, help=f"at most N rows (table default {_TABLE_LIMIT})")
    q.add_argument("--format", choices=("table", "csv", "json"), default="table", help="output format")
    q.add_argument("--all", action="store_true",
                   help="include points whose status is not trustworthy (not_converged, outside_validity, "
                        "failed), with their status")
    q.add_argument("--grid-only", action="store_true", help="leave out points evaluated off the grid")
    q.set_defaults(func=_cmd_query)


def _open(store: str) -> Any:
    from sweepshell.store.reader import open_sweep

    return open_sweep(store)


def _cmd_query(args: argparse.Namespace) -> int:
    from sweepshell.query.table import describe_fields, select_points

    ds = _open(args.store)
    fields = args.fields.split(",") if args.fields is not None else None
    if fields is not None and not any(f.strip() for f in fields):
        raise QueryError("--fields is empty; give comma-separated names, e.g. --fields critical_load,regime",
                         field="fields", value=args.fields)
    # the table format shows _TABLE_LIMIT rows by default but counts them all, to say how many it left out
    table = select_points(ds, args.where, fields, sort=args.sort, limit=args.limit, trusted_only=not args.all,
                          include_points=not args.grid_only)
    info = describe_fields(ds)
    shows_outputs = any(c in info.scalar_outputs for c in table.columns)
    if args.format == "json":
        from sweepshell.query.table import to_records

        json.dump(to_records(table), sys.stdout, indent=1, allow_nan=False)
        sys.stdout.write("\n")
    elif args.format == "csv":
        _write_csv(table, sys.stdout)
    else:
        shown = table if args.limit is not None else table.iloc[:_TABLE_LIMIT]
        sys.stdout.write(_format_table(shown))
        if len(shown) < len(table):
            print(f"({len(table) - len(shown)} more rows; use --limit N or --format csv)", file=sys.stderr)
        print(f"{len(table)} point{'s' if len(table) != 1 else ''}", file=sys.stderr)
    if shows_outputs and len(table):
        print(CAUTION, file=sys.stderr)
    return 0


def _cell(value: Any, *, precise: bool) -> str:
    if isinstance(value, float):
        if math.isnan(value):
            return "" if precise else "nan"
        return repr(value) if precise else f"{value:.6g}"
    return str(value)


def _write_csv(table: pd.DataFrame, out: io.TextIOBase | Any) -> None:
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(list(table.columns))
    columns = [table[c].astype(str).tolist() if hasattr(table[c], "cat") else table[c].tolist()
               for c in table.columns]
    for row in zip(*columns, strict=True):
        writer.writerow([_cell(v, precise=True) for v in row])


def _format_table(table: pd.DataFrame) -> str:
    header = [str(c) for c in table.columns]
    columns = [table[c].astype(str).tolist() if hasattr(table[c], "cat") else table[c].tolist()
               for c in table.columns]
    rows = [[_cell(v, precise=False) for v in row] for row in zip(*columns, strict=True)]
    widths = [max([len(h)] + [len(r[i]) for r in rows]) for i, h in enumerate(header)]
    numeric = [table[c].dtype.kind in "fiu" for c in table.columns]

    def line(cells: list[str]) -> str:
        return "  ".join(c.rjust(w) if n else c.ljust(w) for c, w, n in zip(cells, widths, numeric,
                                                                             strict=True)).rstrip() + "\n"

    return line(header) + line(["-" * w for w in widths]) + "".join(line(r) for r in rows)
