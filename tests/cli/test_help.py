"""Commands that print critical loads carry the caution in their help; the help answers without heavy imports."""

from __future__ import annotations

import subprocess
import sys

import pytest

from sweepshell.cli.main import main


@pytest.mark.parametrize("command", [[], ["run"], ["query"]])
def test_help_carries_the_caution(capsys, command):
    with pytest.raises(SystemExit) as stop:
        main([*command, "--help"])
    assert stop.value.code == 0
    text = " ".join(capsys.readouterr().out.split())
    assert "knock-down factors" in text and "licensed engineering review" in text


def test_help_imports_no_heavy_library():
    code = ("import sys; from sweepshell.cli.main import build_parser; build_parser(); "
            "heavy = [m for m in ('xarray', 'zarr', 'dask', 'pandas', 'matplotlib', 'scipy') if m in sys.modules]; "
            "print(heavy); sys.exit(1 if heavy else 0)")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60, check=False)
    assert proc.returncode == 0, proc.stdout + proc.stderr
