"""The analysis commands are registered, documented and cheap to load."""

from __future__ import annotations

import subprocess
import sys

from sweepshell.cli.main import build_parser


def test_help_lists_the_commands_without_importing_heavy_libraries():
    code = ("import sys; from sweepshell.cli.main import build_parser; build_parser(); "
            "print(sorted(m for m in ('pandas', 'xarray', 'matplotlib', 'zarr', 'dask') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"
    text = build_parser().format_help()
    for command in ("query", "map", "boundary", "path", "report"):
        assert command in text


def test_query_help_documents_the_grammar():
    parser = build_parser()
    sub = next(a for a in parser._actions if a.dest == "command")
    text = sub.choices["query"].format_help()
    for piece in ("and / or", "not in", "No calls, attribute access", "regime == \"buckled\""):
        assert piece in " ".join(text.split()), piece
