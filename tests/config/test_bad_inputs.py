"""Bad input: one clear line on stderr naming the problem and the fix, exit code 2, nothing written."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest

from sweepshell.cli.main import main
from tests.conftest import COLUMN_SWEEP, write_sweep


def _snapshot(root: Path) -> dict[str, str]:
    return {str(p.relative_to(root)): hashlib.sha256(p.read_bytes()).hexdigest() if p.is_file() else "dir"
            for p in sorted(root.rglob("*"))}


CAP_SWEEP = """\
name: dome
model: shallow_cap
fixed: {poisson_ratio: 0.3, edge: clamped, load: pressure}
axes:
  shell_parameter: {linspace: [3, 8, 6]}
"""

# (id, sweep file text or None for the standard one, extra command-line arguments, expected message part)
CASES = [
    ("unknown-model", COLUMN_SWEEP.replace("model: winkler_column", "model: nosuch"), [],
     "model='nosuch' is not a registered model; use one of"),
    ("below-bound", None, ["fixed.end=pinned", "+fixed.load_ratio=-1", "~axes.load_ratio"],
     "fixed.load_ratio=-1 is outside [0, inf); use a value at or above 0"),
    ("axis-below-bound", None, ["axes.stiffness_ratio=[-1,2,3]"],
     "axes.stiffness_ratio=-1 is outside [0, inf); use a value at or above 0"),
    ("unknown-fixed-parameter", None, ["+fixed.thickness=1"],
     "model 'winkler_column' has no parameter 'thickness'; use one of stiffness_ratio, load_ratio, end"),
    ("unknown-axis-parameter", None, ["+axes.thickness=[1,2]"],
     "model 'winkler_column' has no parameter 'thickness'"),
    ("missing-required", None, ["~axes.load_ratio"],
     "parameter 'load_ratio' of model 'winkler_column' is required; add it to fixed or axes"),
    ("empty-axis", None, ["axes.load_ratio=[]"], "axes.load_ratio has no values; give at least one"),
    ("repeated-values", None, ["axes.load_ratio=[1,2,1]"],
     "axes.load_ratio repeats value(s) [1.0]; each value may appear once"),
    ("too-many-points", None, ["limits.max_points=100"],
     "the grid has 300 points (20 x 15), above limits.max_points=100; use fewer axis values or raise"),
    ("absurd-grid", None, ["axes.load_ratio={linspace:[0,1,1000000000]}"],
     "the grid has 20000000000 points (20 x 1000000000), above limits.max_points"),
    ("malformed-override", None, ["axes.load_ratio=range(3,"], "override 'axes.load_ratio=range(3,' is malformed"),
    ("override-without-equals", None, ["fixed.end"], "override 'fixed.end' is malformed"),
    ("unknown-top-key", None, ["colour=red"], "override 'colour=red' names unknown key 'colour'"),
    ("sweep-outside-axes", None, ["fixed.end=pinned,weak"],
     "sweeps a value outside axes; only axes.NAME takes several values"),
    ("interval-sweep", None, ["axes.load_ratio=interval(0,1)"], "is not a finite set of values"),
    ("unknown-setting", None, ["+settings.mesh=3"], "settings.mesh is not a setting of model 'winkler_column'"),
    ("linspace-arity", COLUMN_SWEEP.replace("{linspace: [0.5, 40, 15]}", "{linspace: [0.5, 40]}"), [],
     "axes.load_ratio: linspace takes three numbers [start, stop, count]"),
    ("scalar-axis", None, ["axes.load_ratio=3"], "axes.load_ratio=3 is a single value; an axis needs several"),
    ("fixed-and-swept", None, ["+fixed.load_ratio=2"], "parameter 'load_ratio' is both fixed and swept"),
    ("bad-choice", None, ["+axes.end=[pinned,free]", "~fixed.end"],
     "axes.end='free' is not allowed; use one of pinned, weak"),
    ("bad-executor", None, ["executor.kind=gpu"], "executor.kind='gpu' is unknown; use one of auto, local, threads"),
    ("zero-workers", None, ["executor.workers=0"], "executor.workers=0 must be a whole number ≥ 1"),
    ("distributed-no-address", None, ["executor=distributed"], "executor=distributed needs an address"),
    ("unknown-preset", None, ["executor=cloud"], "executor presets are auto, distributed, local, threads"),
    ("unknown-file-key", COLUMN_SWEEP + "colour: red\n", [], "has unknown key(s) colour; allowed keys are"),
    ("yaml-syntax", "name: x\naxes: [1, 2\n", [], "is not valid YAML at line"),
    ("logspace-overflow", None, ["axes.load_ratio={logspace:[0,400,3]}"], "logspace exponents [0, 400] overflow"),
    ("bad-name", COLUMN_SWEEP.replace("name: column", "name: ../escape"), [], "name='../escape' is not a valid"),
    ("poisson-ratio-half", CAP_SWEEP, ["fixed.poisson_ratio=0.5"],
     "fixed.poisson_ratio=0.5 is outside [-0.9, 0.5); use a value below 0.5"),
    ("zero-thickness", CAP_SWEEP, ["+fixed.thickness=0"], "fixed.thickness=0 is outside (0, inf); use a value above 0"),
    ("negative-thickness-axis", CAP_SWEEP, ["+axes.thickness=[0.001,-0.002]"],
     "axes.thickness=-0.002 is outside (0, inf); use a value above 0"),
]


@pytest.mark.parametrize(("text", "extra", "expected"), [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_bad_input_one_line_exit_2_nothing_written(workdir, capsys, text, extra, expected):
    sweep = write_sweep(workdir, text if text is not None else COLUMN_SWEEP)
    before = _snapshot(workdir)
    code = main(["run", str(sweep), *extra])
    err = capsys.readouterr().err
    assert code == 2
    assert expected in err
    assert err.count("\n") == 1 and err.startswith("sweepshell: error: ")
    assert _snapshot(workdir) == before


def test_missing_sweep_file(workdir, capsys):
    code = main(["run", "nowhere/sweep.yaml"])
    err = capsys.readouterr().err
    assert code == 2 and "sweep file 'nowhere/sweep.yaml' does not exist" in err
    assert list(workdir.iterdir()) == []


def test_unknown_sweep_name_lists_the_known_ones(workdir, capsys):
    code = main(["run", "no_such_sweep"])
    err = capsys.readouterr().err
    assert code == 2 and "sweep 'no_such_sweep' is neither a file nor a name in" in err


@pytest.mark.parametrize(("override", "expected"), [
    ("fixed.end=weak", "was made with other fixed parameters (end: store has \"pinned\", this sweep \"weak\")"),
    ("axes.load_ratio=[1,2,3]", "was made with other axes (load_ratio:"),
    ("settings.path_samples=4", "was made with other settings (path_samples: store has 8, this sweep 4)"),
])
def test_store_of_another_sweep_is_refused_and_untouched(workdir, capsys, override, expected):
    sweep = write_sweep(workdir, COLUMN_SWEEP)
    assert main(["run", str(sweep), "--progress", "none"]) == 0
    capsys.readouterr()
    before = _snapshot(workdir)
    code = main(["run", str(sweep), override])
    err = capsys.readouterr().err
    assert code == 2
    assert expected in err and "run into a new store with store.path=results/column-2.zarr" in err
    assert _snapshot(workdir) == before


def test_store_path_that_is_a_file(workdir, capsys):
    sweep = write_sweep(workdir, COLUMN_SWEEP)
    (workdir / "notes.txt").write_text("keep me")
    before = _snapshot(workdir)
    code = main(["run", str(sweep), "store.path=notes.txt"])
    err = capsys.readouterr().err
    assert code == 2 and "store.path='notes.txt' is a file; choose another path" in err
    assert _snapshot(workdir) == before


def test_status_of_a_missing_store(workdir, capsys):
    assert main(["status", "results/none.zarr"]) == 2
    assert "no store at 'results/none.zarr'" in capsys.readouterr().err


def test_numbers_with_unsigned_exponents_are_numbers(workdir):
    from sweepshell.config.loader import load_plan

    sweep = write_sweep(workdir, COLUMN_SWEEP.replace("{linspace: [0.5, 40, 15]}", "[1e0, 2.5e1, 4E+1]"))
    plan = load_plan(str(sweep))
    assert plan.axes[1].values == (1.0, 25.0, 40.0)


def test_infinity_is_a_fixed_value_only_where_the_range_includes_it(workdir, capsys):
    """A flat strip (transverse_radius = inf) is meaningful; an infinite Poisson's ratio is not."""
    from sweepshell.cli.main import main
    from sweepshell.store.metadata import ATTR, read_record

    sweep = write_sweep(workdir, """\
        name: flat
        model: curved_strip
        fixed: {transverse_radius: .inf, load: bend_opposite}
        axes:
          width: [0.01, 0.02]
        executor: {kind: threads, workers: 1}
        """)
    assert main(["run", str(sweep), "--progress", "none"]) == 0
    import xarray as xr

    ds = xr.open_zarr(workdir / "results" / "flat.zarr", consolidated=True)
    assert read_record(ds.attrs, ATTR.fixed)["transverse_radius"] == float("inf")
    capsys.readouterr()
    assert main(["status", str(workdir / "results" / "flat.zarr")]) == 0
    before = sorted(p.name for p in workdir.rglob("*"))
    assert main(["run", str(sweep), "fixed.thickness=inf", "store.path=results/other.zarr"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "fixed.thickness=inf is not a finite number" in err
    assert sorted(p.name for p in workdir.rglob("*")) == before
