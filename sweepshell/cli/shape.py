"""The ``shape`` command: draw the shapes a store holds (cap height fields, strip cross-sections) at chosen points.

Bad input (an unknown axis or value, a store without a shape, a single point without a trusted
shape) raises :class:`~sweepshell.errors.QueryError`, printed by ``main`` as one line with exit 2.
matplotlib and xarray are imported inside the command, so ``sweepshell --help`` stays fast.
"""

from __future__ import annotations

import argparse
from typing import Any

from sweepshell.about import CAUTION
from sweepshell.cli.options import STORE_HELP, add_out_option

__all__ = ["register"]


def register(subparsers: Any) -> None:
    """Add the ``shape`` command to the ``sweepshell`` parser."""
    s = subparsers.add_parser(
        "shape", help="draw stored shapes (cap height fields, strip cross-sections) at chosen points",
        description="Draw the shape a store holds at one or more points, side by side. A cap's height field w/h "
                    "(output over shape_radius x shape_angle) is drawn seen from above with contour lines, above its "
                    "meridian sections at theta = 0 and, when the wave number n is known, theta = pi/n. A strip's "
                    "cross-section (output over section_stage x section_xy x section_arc) is drawn unloaded, at the "
                    "peak moment and in the fold, to equal scale, in mm or whatever prefix suits its size. Each "
                    "--at gives one point as comma-separated NAME=VALUE pairs (nearest grid value for numbers, exact "
                    "names for categories, reported); axes not named take their first value. With one point, a "
                    "point without a trusted shape is an error; with several, its panel says why it is empty.",
        epilog=CAUTION)
    s.add_argument("store", metavar="STORE", help=STORE_HELP)
    s.add_argument("--at", action="append", metavar="NAME=VALUE[,NAME=VALUE...]",
                   help="one point (repeatable: one panel each, at most 6)")
    add_out_option(s, "FILE.png or FILE.svg (default: <store>-shape.png)")
    s.set_defaults(func=_cmd_shape)


def _cmd_shape(args: argparse.Namespace) -> int:
    from sweepshell.cli.analysis import _open, _out_path, _save_and_tell
    from sweepshell.plot.paths import parse_point
    from sweepshell.plot.shape import draw_shapes

    points = [parse_point(text) for text in args.at or []]
    out = _out_path(args, "shape")
    result = draw_shapes(_open(args.store), points)
    return _save_and_tell(result.figure, out, list(result.notes))
