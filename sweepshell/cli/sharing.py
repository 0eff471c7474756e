"""Commands for sharing results: ``catalog``, ``merge``, ``verify``, ``export``.

Each command takes the parsed arguments and returns an exit code; bad input raises a
:class:`~sweepshell.errors.SweepshellError` that ``main`` prints as one line (exit 2).
``verify`` exits 1 when it finds problems. xarray, zarr and pandas are imported inside the
commands, so ``sweepshell --help`` stays fast.
"""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any

from sweepshell.cli.options import STORE_HELP, add_format_option, add_out_option

__all__ = ["register"]

EXIT_OK = 0
EXIT_PROBLEMS = 1


def register(subparsers: Any) -> None:
    """Add the sharing commands to the ``sweepshell`` parser."""
    cat = subparsers.add_parser(
        "catalog", help="list the stores under a results folder",
        description="List the stores under a results folder (default results/): model and version, axes and "
                    "their ranges, points by status, size on disk, created and updated times. An index "
                    "(DIR/.sweepshell-catalog.sqlite) caches what did not change; the stores stay the source "
                    "of truth and a damaged or foreign index is rebuilt.")
    cat.add_argument("dir", metavar="DIR", nargs="?", default="results", help="results folder (default results/)")
    add_format_option(cat)
    cat.add_argument("--no-index", action="store_true", help="read every store; neither read nor write the index")
    cat.add_argument("--clean", action="store_true",
                     help="remove leftovers of killed processes (half-built stores, stale block claims)")
    cat.set_defaults(func=_cmd_catalog)

    merge = subparsers.add_parser(
        "merge", help="combine two stores of the same model, version and settings",
        description="Combine stores A and B made by the same model, model version, settings and fixed "
                    "parameters into a new store C over the union of their axis values (numeric axes sorted). "
                    "Points computed in neither are pending: `sweepshell run` on C's sweep computes them. A "
                    "point final in both with different values is a conflict: merge stops and names the first "
                    "few unless --prefer picks a side. C records both sources in its merged_from_json "
                    "attribute.")
    merge.add_argument("a", metavar="A", help="first store")
    merge.add_argument("b", metavar="B", help="second store")
    add_out_option(merge, "the new store (must not exist)", required=True, metavar="C")
    merge.add_argument("--prefer", choices=("a", "b"), help="on conflicting points keep A's (a) or B's (b) values")
    merge.set_defaults(func=_cmd_merge)

    verify = subparsers.add_parser(
        "verify", help="check that a store is internally consistent",
        description="Check a store: metadata and attributes readable, every chunk decodes (zstd checksums catch "
                    "flipped bytes), the ledger agrees with the values (untrusted statuses have NaN outputs and "
                    "regime -1, trusted ones a regime). Reports the blocks a run would recompute.",
        epilog="Exit codes: 0 consistent (pending blocks are not a problem), 1 problems found (also when "
               "--repair reset them), 2 bad input (no store, not a sweepshell store, unknown schema).")
    verify.add_argument("store", metavar="STORE", help=STORE_HELP)
    add_format_option(verify)
    verify.add_argument("--repair", action="store_true",
                        help="set blocks whose status is final but whose chunks do not decode or whose values break "
                             "the ledger rules back to pending, so the next run recomputes them")
    verify.set_defaults(func=_cmd_verify)

    export = subparsers.add_parser(
        "export", help="write a store as netCDF, CSV or Parquet",
        description="Write a store for tools outside the zarr world. netcdf: the whole Dataset (netCDF4 through "
                    "h5netcdf when installed, else netCDF3 through scipy with status stored as int8; list "
                    "attributes joined into strings). csv and parquet: one "
                    "row per grid point with the axis values, every output without extra dimensions, the regime "
                    "name and the status name (parquet needs pyarrow).")
    export.add_argument("store", metavar="STORE", help=STORE_HELP)
    export.add_argument("--format", required=True, choices=("netcdf", "csv", "parquet"), help="file format")
    add_out_option(export, "output file (default: STORE with .nc/.csv/.parquet); '-' writes CSV to stdout")
    export.add_argument("--force", action="store_true", help="replace FILE if it exists")
    export.add_argument("--engine", choices=("h5netcdf", "scipy"),
                        help="netCDF writer (default: h5netcdf when installed, else scipy)")
    export.set_defaults(func=_cmd_export)


def _format_bytes(n: int) -> str:
    size = float(n)
    for unit in ("B", "kB", "MB", "GB"):
        if size < 1000 or unit == "GB":
            return f"{size:.0f} {unit}" if unit == "B" else f"{size:.1f} {unit}"
        size /= 1000
    return f"{n} B"  # pragma: no cover


def _format_axis(axis: dict[str, Any]) -> str:
    low, high = axis["min"], axis["max"]
    if isinstance(low, float) and isinstance(high, float):
        return f"{axis['name']}[{axis['size']}] {low:g}..{high:g}"
    return f"{axis['name']}[{axis['size']}] {low}..{high}"


def _cmd_catalog(args: argparse.Namespace) -> int:
    from sweepshell.store.catalog import read_catalog

    listing = read_catalog(args.dir, use_index=not args.no_index, clean=args.clean)
    if args.format == "json":
        print(json.dumps(listing.to_dict(), indent=2))
        return EXIT_OK
    for left in listing.leftovers:
        print(f"{left}: {'removed' if args.clean else 'left over by a killed process'}")
    if listing.leftovers and not args.clean:
        print(f"{len(listing.leftovers)} leftovers; `sweepshell catalog {args.dir} --clean` removes them")
    if not listing.entries:
        print(f"no stores under {listing.results_dir}")
        return EXIT_OK
    for e in listing.entries:
        if e.problem is not None:
            print(f"{e.path}: unreadable ({e.problem}); {_format_bytes(e.bytes_on_disk)}")
            continue
        final = e.total - e.counts.get("pending", 0)
        counts = ", ".join(f"{v} {k}" for k, v in e.counts.items() if v)
        print(f"{e.path}: {e.model} {e.model_version}, sweep {e.sweep}, {final}/{e.total} final ({counts}), "
              f"{_format_bytes(e.bytes_on_disk)}")
        print(f"    axes: {', '.join(_format_axis(a) for a in e.axes)}")
        print(f"    created {e.created}, updated {e.updated}")
    print(f"{len(listing.entries)} stores under {listing.results_dir} ({listing.reread} read, "
          f"{len(listing.entries) - listing.reread} from the index)")
    return EXIT_OK


def _cmd_merge(args: argparse.Namespace) -> int:
    from sweepshell.store.merge import merge_stores

    report = merge_stores(args.a, args.b, args.out, prefer=args.prefer)
    print(report.to_line())
    return EXIT_OK


def _cmd_verify(args: argparse.Namespace) -> int:
    from sweepshell.store.verify import verify_store

    report = verify_store(args.store, repair=args.repair)
    if args.format == "json":
        print(json.dumps(report.to_dict(), indent=2))
    else:
        for line in report.to_lines():
            print(line)
    return EXIT_OK if report.consistent else EXIT_PROBLEMS


def _cmd_export(args: argparse.Namespace) -> int:
    from sweepshell.store.export import export_store

    target = export_store(args.store, args.format, args.out, overwrite=args.force,
                          stdout=sys.stdout if args.out == "-" else None, engine=args.engine)
    if target is not None:
        print(f"wrote {target}", file=sys.stderr if args.out == "-" else sys.stdout)
    return EXIT_OK
