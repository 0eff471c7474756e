"""The README's tour runs as written (on a smaller grid) and gives the numbers the tests elsewhere pin down."""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np

from sweepshell import open_sweep
from sweepshell.cli.main import main

README = Path(__file__).resolve().parents[1] / "README.md"


def _tour_sweep() -> str:
    text = README.read_text()
    block = re.search(r"```yaml\n(# configs/sweep/my_domes.yaml\n.*?)```", text, re.S)
    assert block, "the README lost its example sweep"
    return block.group(1)


def test_readme_sweep_runs_and_queries(workdir, capsys):
    (workdir / "my_domes.yaml").write_text(_tour_sweep())
    code = main(["run", "my_domes.yaml", "--progress", "none", "axes.shell_parameter=[4.0,8.0]",
                 "axes.dimple_amplitude=[0.01]", "executor=threads"])
    assert code == 0, capsys.readouterr().err
    ds = open_sweep(workdir / "results" / "my_domes.zarr")
    regimes = ds.regime.attrs["flag_meanings"].split()[1:]
    got = [regimes[int(r)] for r in ds.regime.values[:, 0]]
    # clamped caps: snapping at λ = 4, asymmetric bifurcation first at λ = 8 (Huang 1964, value from memory;
    # pinned down in tests/models/shallow_cap/test_reference.py)
    assert got == ["limit_point", "bifurcation"]
    assert 0.5 < float(ds.critical_load.values[0, 0]) < 0.65
    capsys.readouterr()
    assert main(["query", "results/my_domes.zarr", "--where", 'shell_parameter > 5 and regime == "bifurcation"',
                 "--fields", "critical_load,knockdown,critical_wavenumber,regime", "--format", "json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert [r["shell_parameter"] for r in rows] == [8.0]
    assert rows[0]["regime"] == "bifurcation" and rows[0]["critical_wavenumber"] >= 2
    assert np.isclose(rows[0]["knockdown"], rows[0]["critical_load"], rtol=0.2)
