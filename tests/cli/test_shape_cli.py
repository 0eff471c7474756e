"""``sweepshell shape``: figures of stored shapes from the command line, one-line refusals with exit 2."""

from __future__ import annotations

import io

import matplotlib.image as mpimg
import numpy as np
import pytest

from sweepshell.cli.main import main


def test_shape_writes_a_png_of_points_side_by_side(shape_stores, tmp_path, capsys):
    out = tmp_path / "caps.png"
    code = main(["shape", str(shape_stores["cap"]), "--at", "shell_parameter=9,max_indentation=8",
                 "--at", "shell_parameter=14, max_indentation=19", "--out", str(out)])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert captured.out.strip() == str(out)
    assert "point 2: max_indentation = 20 (nearest to 19)" in captured.err
    image = mpimg.imread(io.BytesIO(out.read_bytes()))
    assert min(image.shape[:2]) > 900 and np.std(image[..., :3]) > 0.05


def test_shape_of_a_strip_as_svg(shape_stores, tmp_path, capsys):
    out = tmp_path / "strip.svg"
    assert main(["shape", str(shape_stores["strip"]), "--at", "width=0.04", "--out", str(out)]) == 0
    text = out.read_text()
    assert text.lstrip().startswith("<?xml") and "mm" in text
    assert "load = bend_opposite (first value; choose with --at load=...)" in capsys.readouterr().err


@pytest.mark.parametrize(("kind", "args", "message"), [
    ("cap", ["--at", "thickness=2"], "'thickness' is not an axis of this store; its axes are shell_parameter, "
                                     "max_indentation"),
    ("cap", ["--at", "shell_parameter=20,max_indentation=20"], "status not converged"),
    ("cap", ["--at", "shell_parameter"], "is not name=value"),
    ("cap", ["--out", "shape.pdf"], "must end in .png or .svg"),
    ("strip", ["--at", "load=twist"], "no such value"),
    ("plain", [], "this store has no stored shape"),
])
def test_bad_input_is_one_line_and_exit_2(shape_stores, tmp_path, capsys, monkeypatch, kind, args, message):
    monkeypatch.chdir(tmp_path)
    code = main(["shape", str(shape_stores[kind]), *args, *(["--out", "x.png"] if "--out" not in args else [])])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and err.startswith("sweepshell: error: ") and message in err
    assert not list(tmp_path.iterdir())  # nothing written


def test_missing_store_is_one_line(tmp_path, capsys):
    assert main(["shape", str(tmp_path / "none.zarr"), "--out", str(tmp_path / "x.png")]) == 2
    assert "no store at" in capsys.readouterr().err


def test_help_carries_the_caution(capsys):
    with pytest.raises(SystemExit) as stop:
        main(["shape", "--help"])
    assert stop.value.code == 0
    text = " ".join(capsys.readouterr().out.split())
    assert "--at NAME=VALUE[,NAME=VALUE...]" in text and "licensed engineering review" in text
