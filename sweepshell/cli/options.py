"""Options shared by the commands, so each is spelled and described the same way everywhere.

- Files written: ``-o/--out FILE`` (``--output`` accepted as well).
- Machine-readable output: ``--format json`` (``--json`` kept as its short form).
"""

from __future__ import annotations

from typing import Any

__all__ = ["STORE_HELP", "add_format_option", "add_out_option"]

STORE_HELP = "a sweepshell store (a folder ending in .zarr)"


def add_out_option(parser: Any, help_text: str, *, required: bool = False, metavar: str = "FILE") -> None:
    """Add ``-o/--out`` (alias ``--output``), stored as ``args.out``."""
    parser.add_argument("-o", "--out", "--output", dest="out", metavar=metavar, required=required, help=help_text)


def add_format_option(parser: Any, choices: tuple[str, ...] = ("text", "json"), default: str = "text",
                      help_text: str = "output format") -> None:
    """Add ``--format CHOICE`` and ``--json`` (same as ``--format json``), stored as ``args.format``."""
    parser.add_argument("--format", choices=choices, default=default, help=f"{help_text} (default {default})")
    parser.add_argument("--json", dest="format", action="store_const", const="json", help="same as --format json")
