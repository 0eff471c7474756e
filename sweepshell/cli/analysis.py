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

from sweepshell.about import CAUTION
from sweepshell.cli.options import STORE_HELP, add_format_option, add_out_option
from sweepshell.errors import QueryError

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["register"]

_WHERE_HELP = (
    "keep points where EXPR holds. Grammar: comparisons (< <= > >= == != , chains like 2 < x <= 5, "
    "`in [..]`, `not in [..]`) of axes, scalar outputs, regime, status and source, combined with and / or / "
    "not and parentheses; arithmetic + - * / ** %% between numbers. regime and status compare by name "
    "(regime == \"buckled\"); source is \"grid\" or \"points\" (evaluated off the grid). Strings in double or "
    "single quotes. No calls, attribute access, indexing or other names: an expression never runs code. "
    "Example (a shallow_cap store): --where 'shell_parameter > 5 and regime == \"bifurcation\"'"
)
_TABLE_LIMIT = 40


def register(subparsers: Any) -> None:
    """Add the analysis commands to the ``sweepshell`` parser."""
    q = subparsers.add_parser(
        "query", help="select points of a store (table, CSV or JSON)",
        description="Select points of a store: by default every point with a trustworthy status (ok, "
                    "no_instability), grid and refined points alike, with its axis values, scalar outputs and "
                    "regime. " + _WHERE_HELP.replace("keep points", "--where EXPR keeps points", 1).replace("%%", "%"),
        epilog="JSON is a list of objects, one per point, with the axis values and the requested fields "
               "(regime and status as names, missing values as null). The caution about critical loads goes "
               "to stderr, so stdout stays clean CSV/JSON. " + CAUTION)
    q.add_argument("store", metavar="STORE", help=STORE_HELP)
    q.add_argument("--where", metavar="EXPR", help=_WHERE_HELP)
    q.add_argument("--fields", metavar="A,B", help="comma-separated fields besides the axes "
                   "(default: every scalar output and regime)")
    q.add_argument("--sort", metavar="FIELD", help="sort by FIELD; --sort=-FIELD sorts descending")
    q.add_argument("--limit", metavar="N", type=int, help=f"at most N rows (table default {_TABLE_LIMIT})")
    add_format_option(q, ("table", "csv", "json"), "table")
    q.add_argument("--all", action="store_true",
                   help="include points whose status is not trustworthy (not_converged, outside_validity, "
                        "failed), with their status")
    q.add_argument("--grid-only", action="store_true", help="leave out points evaluated off the grid")
    q.set_defaults(func=_cmd_query)
    _register_map(subparsers)
    _register_boundary(subparsers)
    _register_path(subparsers)
    _register_report(subparsers)
    _register_refine(subparsers)


def _open(store: str) -> Any:
    """Open a store for reading without dask (lazy numpy indexing): importing dask.array costs seconds."""
    import xarray as xr

    from sweepshell.store.reader import check_readable_store

    check_readable_store(store, chunks=True)
    return xr.open_zarr(store, chunks=None, consolidated=True, zarr_format=3)


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

        # streamed in slices: memory stays that of the table, not of one Python object per value
        _emit("[")
        for start in range(0, len(table), _JSON_SLICE):
            rows = to_records(table.iloc[start:start + _JSON_SLICE])
            _emit(("\n" if start == 0 else ",\n")
                  + ",\n".join(json.dumps(r, allow_nan=False, separators=(", ", ": ")) for r in rows))
        _emit("\n]\n")
    elif args.format == "csv":
        buffer = io.StringIO()
        _write_csv(table, buffer)
        _emit(buffer.getvalue())
    else:
        shown = table if args.limit is not None else table.iloc[:_TABLE_LIMIT]
        _emit(_format_table(shown))
        if len(shown) < len(table):
            print(f"({len(table) - len(shown)} more rows; use --limit N or --format csv)", file=sys.stderr)
        print(f"{len(table)} point{'s' if len(table) != 1 else ''}", file=sys.stderr)
    if shows_outputs and len(table):
        print(CAUTION, file=sys.stderr)
    return 0


_JSON_SLICE = 2000


def _emit(text: str) -> None:
    """Write to stdout; a reader that stops early (``| head``) is not an error."""
    import os

    try:
        sys.stdout.write(text)
        sys.stdout.flush()
    except BrokenPipeError:
        # stop Python from complaining again when it flushes stdout at exit
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())


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


def _register_map(subparsers: Any) -> None:
    m = subparsers.add_parser(
        "map", help="draw a regime map (phase diagram) or an output across a sweep",
        description="With --y AXIS: a regime map over two axes — regimes as filled regions (colour-blind-safe "
                    "palette), boundaries as lines, optional contours of an output, failed / unconverged / "
                    "outside-validity points marked. With --y OUTPUT: the output against --x, one line per value "
                    "of a third axis (--color AXIS, default the first other axis with few values). Axes given in "
                    "log spacing are drawn on log scales. Every other axis is fixed by --at NAME=VALUE (nearest "
                    "grid value, reported) or at its first value.")
    m.add_argument("store", metavar="STORE", help=STORE_HELP)
    m.add_argument("--x", required=True, metavar="AXIS", help="axis along the horizontal")
    m.add_argument("--y", required=True, metavar="AXIS|OUTPUT", help="axis (regime map) or output (line plot)")
    m.add_argument("--color", metavar="VAR", help="map: 'regime' (default) or a scalar output drawn as a colour "
                   "field; line plot: the axis giving one line per value")
    m.add_argument("--contour", metavar="OUTPUT", help="labelled contour lines of a scalar output (map)")
    m.add_argument("--at", action="append", metavar="NAME=VALUE", help="fix another axis (repeatable)")
    m.add_argument("--show-points", action="store_true", help="mark the off-grid points (refinement, bisection)")
    add_out_option(m, "FILE.png or FILE.svg (default: <store>-<x>-<y>.png)")
    _add_no_caution(m)
    m.set_defaults(func=_cmd_map)


def _add_no_caution(parser: Any) -> None:
    parser.add_argument("--no-caution", action="store_true",
                        help="leave the caution footer off the picture (for a figure in a paper); the caution "
                             "stays in the file's metadata, and reports always show it")


def _out_path(args: argparse.Namespace, suffix: str) -> str:
    from pathlib import Path

    if args.out:
        out = Path(args.out)
        if out.suffix.lower() not in (".png", ".svg"):
            raise QueryError(f"--out {args.out!r} must end in .png or .svg", field="out", value=args.out)
        if not out.parent.exists():
            raise QueryError(f"--out {args.out!r}: folder {str(out.parent)!r} does not exist", field="out",
                             value=args.out)
        return str(out)
    store = Path(args.store.rstrip("/"))
    return str(store.with_name(f"{store.stem}-{suffix}.png"))


def _cmd_map(args: argparse.Namespace) -> int:
    from sweepshell.plot.regime_map import draw_output_lines, draw_regime_map
    from sweepshell.query.slicing import parse_at
    from sweepshell.query.table import describe_fields

    ds = _open(args.store)
    at = parse_at(args.at)
    out = _out_path(args, f"{args.x}-{args.y}")
    info = describe_fields(ds)
    if args.y in info.axes:
        result = draw_regime_map(ds, args.x, args.y, color=args.color, contour=args.contour, at=at,
                                 show_points=args.show_points, caution=not args.no_caution)
    else:
        if args.contour:
            raise QueryError("--contour applies to regime maps (--y AXIS), not to line plots", field="contour")
        result = draw_output_lines(ds, args.x, args.y, series=args.color, at=at, caution=not args.no_caution)
    return _save_and_tell(result.figure, out, [f"fixed {cut.describe()}" for cut in result.view.cuts]
                          + list(result.notes))


def _save_and_tell(figure: Any, out: str, notes: list[str]) -> int:
    """Save a figure, say on stderr what was fixed or noticed, and print the file written."""
    from sweepshell.plot.style import save_figure

    save_figure(figure, out)
    for note in notes:
        print(note, file=sys.stderr)
    print(out)
    return 0


def _register_boundary(subparsers: Any) -> None:
    b = subparsers.add_parser(
        "boundary", help="export the boundary between two regimes as polylines (CSV/JSON)",
        description="Trace the boundary between regimes A and B over two axes and locate it more precisely than "
                    "the grid spacing: each grid edge joining an A point and a B point is bisected --bisections "
                    "times with new model evaluations (the model is rebuilt from the store by registered name; a "
                    "store of another model version is refused). New points are recorded in the store's point "
                    "list, so later maps, queries and boundaries use them. Other axes are fixed by --at.")
    b.add_argument("store", metavar="STORE", help=STORE_HELP)
    b.add_argument("--between", nargs=2, required=True, metavar=("A", "B"), help="two regime names")
    b.add_argument("--x", metavar="AXIS", help="horizontal axis (default: the first numeric axis)")
    b.add_argument("--y", metavar="AXIS", help="vertical axis (default: the next numeric axis)")
    b.add_argument("--at", action="append", metavar="NAME=VALUE", help="fix another axis (repeatable)")
    b.add_argument("--bisections", type=int, default=6,
                   help="bisections per grid edge (default 6: brackets of 1/64 of the spacing); 0 = no new "
                        "evaluations")
    b.add_argument("--no-record", action="store_true", help="do not add the new points to the store")
    add_format_option(b, ("csv", "json"), "csv")
    add_out_option(b, "write to FILE instead of stdout")
    b.set_defaults(func=_cmd_boundary)


def _default_axes(ds: Any, x: str | None, y: str | None) -> tuple[str, str]:
    from sweepshell.query.table import describe_fields

    info = describe_fields(ds)
    numeric = [a for a in info.axes if ds[a].dtype.kind in "fiu" and ds.sizes[a] > 1 and a not in (x, y)]
    if x is None:
        if not numeric:
            raise QueryError("the store has no numeric axis with several values left for --x", field="x")
        x = numeric.pop(0)
    if y is None:
        if not numeric:
            raise QueryError("the store has no second numeric axis for --y; a boundary needs two axes", field="y")
        y = numeric.pop(0)
    return x, y


def _cmd_boundary(args: argparse.Namespace) -> int:
    from pathlib import Path

    from sweepshell.engine.evaluate import store_evaluator
    from sweepshell.query.boundary import boundary_to_records, find_boundary
    from sweepshell.query.slicing import parse_at

    ds = _open(args.store)
    x, y = _default_axes(ds, args.x, args.y)
    if args.out and not Path(args.out).parent.exists():
        raise QueryError(f"--out {args.out!r}: folder does not exist", field="out", value=args.out)
    evaluator = store_evaluator(ds, record=not args.no_record) if args.bisections > 0 else None
    boundary, view = find_boundary(ds, x, y, (args.between[0], args.between[1]), at=parse_at(args.at),
                                   bisections=args.bisections, evaluator=evaluator)
    for cut in view.cuts:
        print(f"fixed {cut.describe()}", file=sys.stderr)
    print(f"{len(boundary.lines)} polyline(s), {boundary.n_vertices} vertices, {boundary.evaluations} model "
          f"evaluations", file=sys.stderr)
    buffer = io.StringIO()
    if args.format == "json":
        record = boundary_to_records(boundary, {"model": ds.attrs.get("model"),
                                                "model_version": ds.attrs.get("model_version"),
                                                "fixed": view.fixed_values})
        buffer.write(json.dumps(record, indent=1) + "\n")
    else:
        writer = csv.writer(buffer, lineterminator="\n")
        writer.writerow(["line", x, y, "bracket_axis", "bracket_low", "bracket_high"])
        for i, line in enumerate(boundary.lines):
            for k in range(len(line.x)):
                writer.writerow([i, repr(float(line.x[k])), repr(float(line.y[k])), (x, y)[int(line.along[k])],
                                 repr(float(line.low[k])), repr(float(line.high[k]))])
    if args.out:
        Path(args.out).write_text(buffer.getvalue())
        print(args.out)
    else:
        _emit(buffer.getvalue())
    return 0


def _register_path(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "path", help="plot load paths (outputs sampled along an extra dimension) at chosen points",
        description="Plot an output with an extra dimension (e.g. a sampled load path) at one or more points, "
                    "overlaid. Each --at gives one point as comma-separated NAME=VALUE pairs (nearest grid values, "
                    "reported); axes not named take their first value.")
    p.add_argument("store", metavar="STORE", help=STORE_HELP)
    p.add_argument("--at", action="append", metavar="NAME=VALUE[,NAME=VALUE...]", help="one point (repeatable)")
    p.add_argument("--y", metavar="OUTPUT[:COMPONENT]", help="path output to draw, with the component for outputs "
                   "stored in parts, e.g. load_path:load (default: the first path output, its load against its "
                   "other component)")
    p.add_argument("--x", metavar="OUTPUT[:COMPONENT]", help="path output along the horizontal (default: the "
                   "other component, or the sample index)")
    add_out_option(p, "FILE.png or FILE.svg (default: <store>-path.png)")
    _add_no_caution(p)
    p.set_defaults(func=_cmd_path)


def _cmd_path(args: argparse.Namespace) -> int:
    from sweepshell.plot.paths import draw_load_paths, parse_point

    ds = _open(args.store)
    points = [parse_point(text) for text in args.at or []]
    out = _out_path(args, "path")
    result = draw_load_paths(ds, points, y=args.y, x=args.x, caution=not args.no_caution)
    return _save_and_tell(result.figure, out, list(result.notes))


def _register_report(subparsers: Any) -> None:
    r = subparsers.add_parser(
        "report", help="write a self-contained HTML report of a store",
        description="Write one HTML file (images embedded) with what was computed (model, version, settings, "
                    "axes, completeness, provenance), regime maps, the boundaries (from stored points; sharpen them "
                    "first with `sweepshell boundary` or `sweepshell refine`), the extreme points of every output "
                    "and the caution.")
    r.add_argument("store", metavar="STORE", help=STORE_HELP)
    add_out_option(r, "output file (default: <store>-report.html)", metavar="FILE.html")
    r.set_defaults(func=_cmd_report)


def _cmd_report(args: argparse.Namespace) -> int:
    from pathlib import Path

    from sweepshell.plot.report import write_report

    if args.out is not None and not args.out.endswith((".html", ".htm")):
        raise QueryError(f"--out {args.out!r} must end in .html", field="out", value=args.out)
    if args.out is not None and not Path(args.out).parent.exists():
        raise QueryError(f"--out {args.out!r}: folder does not exist", field="out", value=args.out)
    ds = _open(args.store)
    store = Path(args.store.rstrip("/"))
    out = Path(args.out) if args.out else store.with_name(f"{store.stem}-report.html")
    text = write_report(ds, str(store))
    out.write_text(text, encoding="utf-8")
    print(out)
    return 0


def _register_refine(subparsers: Any) -> None:
    r = subparsers.add_parser(
        "refine", help="evaluate new points along regime boundaries, level by level",
        description="Adaptive refinement on views of two numeric axes: every grid cell whose corners carry "
                    "different regimes is split in four, new points evaluated, and so on for --levels levels "
                    "(finest spacing = grid spacing / 2^levels). New points go to the store's point list and are "
                    "used by query, map and boundary; running refine again reuses them. Other axes: every "
                    "combination of their values, or fixed with --at.")
    r.add_argument("store", metavar="STORE", help=STORE_HELP)
    r.add_argument("--levels", type=int, default=3, help="levels of refinement (default 3)")
    r.add_argument("--x", metavar="AXIS", help="first axis (default: the first numeric axis)")
    r.add_argument("--y", metavar="AXIS", help="second axis (default: the next numeric axis)")
    r.add_argument("--at", action="append", metavar="NAME=VALUE", help="fix another axis (repeatable)")
    r.add_argument("--max-evaluations", type=int, default=2_000_000, help="refuse to exceed this many new points")
    r.set_defaults(func=_cmd_refine)


def _cmd_refine(args: argparse.Namespace) -> int:
    from sweepshell.engine.refine import describe_budget, refine_store
    from sweepshell.query.slicing import parse_at

    summary = refine_store(args.store, x=args.x, y=args.y, at=parse_at(args.at), levels=args.levels,
                           max_evaluations=args.max_evaluations)
    print(summary.to_line())
    print(describe_budget(summary), file=sys.stderr)
    return 0
