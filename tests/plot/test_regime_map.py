"""Regime maps and line plots: the files decode and the figures carry the right content."""

from __future__ import annotations

import io

import matplotlib.image as mpimg
import numpy as np
import pytest

from sweepshell import open_sweep
from sweepshell.cli.main import main
from sweepshell.plot.regime_map import draw_output_lines, draw_regime_map


def legend_labels(fig):
    labels = []
    for ax in fig.axes:
        if ax.get_legend() is not None:
            labels += [t.get_text() for t in ax.get_legend().get_texts()]
    for leg in fig.legends:
        labels += [t.get_text() for t in leg.get_texts()]
    return labels


def test_map_png_decodes_and_reports_the_cut(three_axis_fine_store, tmp_path, capsys):
    out = tmp_path / "map.png"
    code = main(["map", str(three_axis_fine_store), "--x", "stiffness_ratio", "--y", "load_ratio", "--at", "end=weak",
                 "--contour", "critical_load", "--out", str(out)])
    assert code == 0
    assert capsys.readouterr().err.strip() == "fixed end = weak"
    image = mpimg.imread(io.BytesIO(out.read_bytes()))
    assert image.shape[0] > 600 and image.shape[1] > 900
    assert np.std(image[..., :3]) > 0.05  # not blank


def test_map_content_regimes_statuses_scales_labels(three_axis_fine_store):
    result = draw_regime_map(open_sweep(three_axis_fine_store), "stiffness_ratio", "load_ratio", at={"end": "pinned"})
    fig = result.figure
    ax = fig.axes[0]
    labels = legend_labels(fig)
    assert {"stable", "buckled", "regime boundary"} <= set(labels)
    assert "failed (21)" in labels  # load_ratio == 0.5 fails at every η
    assert any(label.startswith("outside validity") for label in labels)  # η > 500
    assert ax.get_xscale() == "log" and ax.get_yscale() == "linear"
    assert "η" in ax.get_xlabel() and "load ratio" in ax.get_ylabel()
    assert "winkler_column 1.0" in ax.get_title(loc="left")
    assert any(t.get_text().startswith("Caution") for t in fig.texts)
    # every boundary vertex sits halfway along a grid edge that the closed-form boundary crosses, so it is
    # within half an edge of that curve (Timoshenko & Gere 1961 for the curve; distances in axis units
    # scaled to the plot: log10 η over 4 decades, load over 39.5)
    from sweepshell.models.winkler_column.model import winkler_column_critical

    eta = np.logspace(-1, np.log10(500), 200_001)
    curve = np.stack([np.log10(eta) / 4, winkler_column_critical(eta)[0] / 39.5], 1)
    lines = [line for line in ax.get_lines() if line.get_linewidth() == pytest.approx(1.4)]
    assert lines
    half_edge = max(0.2 / 4, (39.5 / 15) / 39.5) / 2
    for line in lines:
        xs, ys = np.asarray(line.get_xdata()), np.asarray(line.get_ydata())
        for u, v in zip(np.log10(xs) / 4, ys / 39.5, strict=True):
            assert np.min(np.hypot(curve[:, 0] - u, curve[:, 1] - v)) <= half_edge * (1 + 1e-6)


def test_map_at_nearest_value_and_svg(three_axis_fine_store, tmp_path, capsys):
    out = tmp_path / "map.svg"
    assert main(["map", str(three_axis_fine_store), "--x", "stiffness_ratio", "--y", "end", "--at", "load_ratio=3",
                 "--out", str(out)]) == 2  # a categorical axis cannot be a map axis
    capsys.readouterr()
    assert main(["map", str(three_axis_fine_store), "--x", "end", "--y", "stiffness_ratio", "--out", str(out)]) == 2
    capsys.readouterr()
    assert main(["map", str(three_axis_fine_store), "--x", "load_ratio", "--y", "stiffness_ratio", "--color", "margin",
                 "--at", "end=pinned", "--out", str(out)]) == 0
    assert out.read_text().lstrip().startswith("<?xml") and "<svg" in out.read_text()[:1000]


def test_line_plot_one_line_per_value_of_the_third_axis(three_axis_fine_store, tmp_path, capsys):
    result = draw_output_lines(open_sweep(three_axis_fine_store), "stiffness_ratio", "critical_load",
                               at={"load_ratio": "3"})
    ax = result.figure.axes[0]
    data_lines = [line for line in ax.get_lines() if line.get_label() in ("pinned", "weak")]
    assert len(data_lines) == 2
    pinned = next(line for line in data_lines if line.get_label() == "pinned")
    weak = next(line for line in data_lines if line.get_label() == "weak")
    both = np.isfinite(pinned.get_ydata()) & np.isfinite(weak.get_ydata())
    np.testing.assert_allclose(weak.get_ydata()[both], 0.5 * pinned.get_ydata()[both])  # 'weak' halves P_cr
    assert result.view.cuts[0].describe() == "load_ratio = 3.13333 (nearest to 3)"
    out = tmp_path / "lines.png"
    assert main(["map", str(three_axis_fine_store), "--x", "stiffness_ratio", "--y", "critical_load", "--at",
                 "load_ratio=3", "--out", str(out)]) == 0
    assert mpimg.imread(str(out)).ndim == 3


@pytest.mark.parametrize("argv", [
    ["--x", "nope", "--y", "load_ratio"],
    ["--x", "stiffness_ratio", "--y", "load_ratio", "--contour", "nope"],
    ["--x", "stiffness_ratio", "--y", "load_ratio", "--out", "x.pdf"],
    ["--x", "stiffness_ratio", "--y", "load_ratio", "--at", "end=clamped"],
    ["--x", "stiffness_ratio", "--y", "load_ratio", "--at", "load_ratio=3"],
    ["--x", "stiffness_ratio", "--y", "load_ratio", "--at", "end"],
    ["--x", "stiffness_ratio", "--y", "critical_load", "--contour", "margin"],
])
def test_bad_map_requests_exit_2_and_write_nothing(three_axis_fine_store, tmp_path, capsys, argv, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(["map", str(three_axis_fine_store), *argv]) == 2
    out, err = capsys.readouterr()
    assert out == "" and err.count("\n") == 1
    assert not list(tmp_path.glob("*.png"))
