"""curved_strip through the command line: bad input is one line and exit 2; the demo sweep's promise."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import yaml

from sweepshell.cli.main import main
from sweepshell.config.loader import build_plan
from sweepshell.models import Status, make_model
from tests.conftest import write_sweep

DEMO = Path(__file__).resolve().parents[3] / "configs" / "sweep" / "boom_hinge_width_radius.yaml"

STRIP_SWEEP = """\
name: strips
model: curved_strip
fixed: {thickness: 1.0e-4, load: bend_opposite}
axes:
  width: [0.02, 0.04]
  transverse_radius: [0.05, 0.5]
"""


@pytest.mark.parametrize(("override", "expected"), [
    ("fixed.thickness=0", "fixed.thickness=0 is outside (0, inf); use a value above 0"),
    ("fixed.thickness=-1e-4", "fixed.thickness=-0.0001 is outside (0, inf); use a value above 0"),
    ("+fixed.poisson_ratio=0.5", "fixed.poisson_ratio=0.5 is outside (-1, 0.5); use a value below 0.5"),
    ("axes.width=[0.02,0]", "axes.width=0 is outside (0, inf); use a value above 0"),
    ("axes.transverse_radius=[0.05,-1]", "axes.transverse_radius=-1 is outside (0, inf]; use a value above 0"),
    ("fixed.load=twist", "fixed.load='twist' is not allowed; use one of bend_opposite, bend_equal, cantilever"),
    ("+fixed.tip_load=-1", "fixed.tip_load=-1 is outside [0, inf); use a value at or above 0"),
    ("+settings.modes=2", "settings.modes must be a whole number from 4 to 120"),
])
def test_bad_input_is_one_line_exit_2_and_writes_nothing(workdir, capsys, override, expected):
    sweep = write_sweep(workdir, STRIP_SWEEP)
    code = main(["run", str(sweep), override])
    err = capsys.readouterr().err
    assert code == 2 and expected in err
    assert err.count("\n") == 1 and err.startswith("sweepshell: error: ")
    assert sorted(p.name for p in workdir.iterdir()) == ["sweep.yaml"]


def test_bad_input_through_the_installed_command_line(workdir):
    sweep = write_sweep(workdir, STRIP_SWEEP)
    proc = subprocess.run([sys.executable, "-m", "sweepshell", "run", str(sweep), "fixed.thickness=0"],
                          capture_output=True, text=True, timeout=120, check=False)
    assert proc.returncode == 2 and proc.stdout == ""
    assert proc.stderr.count("\n") == 1 and "fixed.thickness=0 is outside (0, inf)" in proc.stderr
    assert "Traceback" not in proc.stderr


def test_demo_sweep_points_hold_collapse_and_leave_the_shallow_range():
    """A wide, well-curved strip holds; a shallow one folds at the root; a deep one is outside validity."""
    cfg = yaml.safe_load(DEMO.read_text())
    plan = build_plan(cfg, source=str(DEMO))
    assert plan.model == "curved_strip" and len(plan.axes) == 2 and plan.shape[0] * plan.shape[1] <= 200
    model = make_model("curved_strip", cfg["settings"])
    widths = np.array(cfg_axis(plan, "width"))
    radii = np.array(cfg_axis(plan, "transverse_radius"))
    picks = [(0.04, radii[np.argmin(abs(radii - 0.05))]), (0.04, radii[-1]), (0.06, radii[0])]
    n = len(picks)
    inputs = {p.name: np.full(n, cfg["fixed"].get(p.name, p.default), dtype=object if p.choices else float)
              for p in model.parameters}
    inputs["width"] = np.array([widths[np.argmin(abs(widths - w))] for w, _ in picks])
    inputs["transverse_radius"] = np.array([r for _, r in picks])
    res = model.solve_batch(inputs)
    assert list(res.status) == [Status.ok, Status.ok, Status.outside_validity]
    assert [model.regimes[r] for r in res.regime[:2]] == ["stiff", "collapsed"]


def cfg_axis(plan, name):
    return next(a for a in plan.axes if a.name == name).to_array()
