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


def _subcommands():
    import argparse

    from sweepshell.cli.main import build_parser

    parser = build_parser()
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    return sub.choices


def test_every_argument_of_every_command_is_described():
    for name, command in _subcommands().items():
        for action in command._actions:
            if action.dest == "help":
                continue
            assert action.help and action.help.strip(), f"{name} {action.option_strings or action.dest}"


def test_one_convention_for_files_and_json():
    commands = _subcommands()
    for name in ("map", "path", "boundary", "report", "merge", "export"):
        options = {s for a in commands[name]._actions for s in a.option_strings}
        assert {"-o", "--out"} <= options, name
    for name in ("status", "models", "catalog", "verify", "query", "boundary"):
        options = {s for a in commands[name]._actions for s in a.option_strings}
        assert {"--format", "--json"} <= options, name
        extra = {"models": [], "catalog": [], "boundary": ["S", "--between", "a", "b"]}.get(name, ["S"])
        assert commands[name].parse_args(["--json", *extra]).format == "json"


def test_query_help_examples_name_a_real_model_s_axes_and_regimes(capsys):
    from sweepshell.models import get_model

    with pytest.raises(SystemExit):
        main(["query", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    cap = get_model("shallow_cap")
    assert "shell_parameter > 5" in text and 'regime == "bifurcation"' in text
    assert "bifurcation" in cap.regimes and any(p.name == "shell_parameter" for p in cap.parameters)
