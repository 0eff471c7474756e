"""Outputs that could mislead: empty selections, meaningless regimes, hidden cautions, flattened fields."""

from __future__ import annotations

import numpy as np
import pytest
from PIL import Image

from sweepshell import CAUTION, open_sweep
from sweepshell.cli.main import main
from sweepshell.plot.paths import draw_load_paths
from sweepshell.query.boundary import trace_boundary
from tests.conftest import compute_column_store
from tests.plot.test_layout import WIDE, stretched

FLEXURE = """\
name: flexure
model: foundation_strip
fixed: {problem: flexure}  # the default inextensible strip: an inf fixed value the store reads back
axes:
  elastic_thickness: {logspace: [3.5, 4.5, 5]}
  plate: [broken, continuous]
"""


@pytest.fixture(scope="module")
def flexure(tmp_path_factory):
    return compute_column_store(tmp_path_factory.mktemp("flex"), "flexure", sweep_text=FLEXURE)


@pytest.fixture(scope="module")
def column(tmp_path_factory):
    return compute_column_store(tmp_path_factory.mktemp("col"), "wide", sweep_text=WIDE)


def test_an_all_nan_selection_is_an_error_naming_why(flexure, tmp_path, capsys):
    out = tmp_path / "empty.png"
    assert main(["map", str(flexure), "--x", "elastic_thickness", "--y", "critical_load", "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "critical_load is NaN at all 10 trusted points" in err and "flexure" in err
    assert not out.exists()


def test_flexure_points_carry_the_flexure_regime_and_reports_draw_outputs_with_data(flexure, tmp_path, capsys):
    ds = open_sweep(flexure)
    assert ds.attrs["model_version"] == "1.2"
    from sweepshell.query.table import regime_names

    codes = set(np.unique(ds["regime"].values).tolist())
    assert [regime_names(ds)[c] for c in codes] == ["flexure"]
    out = tmp_path / "r.html"
    assert main(["report", str(flexure), "-o", str(out)]) == 0
    text = out.read_text()
    assert "alt='flexural_parameter against elastic_thickness'" in text
    assert "alt='critical_load against" not in text


def test_no_caution_drops_the_footer_and_keeps_the_caution_in_the_metadata(column, tmp_path, capsys):
    for flag in ([], ["--no-caution"]):
        out = tmp_path / f"map{len(flag)}.png"
        assert main(["map", str(column), "--x", "stiffness_ratio", "--y", "load_ratio", "-o", str(out), *flag]) == 0
        assert Image.open(out).text["Description"] == CAUTION
    svg = tmp_path / "map.svg"
    assert main(["map", str(column), "--x", "stiffness_ratio", "--y", "load_ratio", "-o", str(svg),
                 "--no-caution"]) == 0
    text = svg.read_text()
    assert CAUTION[:60] in text.split("</metadata>")[0] and "reduced-order" not in text.split("</metadata>")[1]
    with_footer = np.asarray(Image.open(tmp_path / "map0.png"))
    without = np.asarray(Image.open(tmp_path / "map1.png"))
    assert with_footer.shape == without.shape and np.any(with_footer != without)


def test_path_draws_a_field_as_images_not_a_zigzag(column):
    result = draw_load_paths(stretched(open_sweep(column)), [{"load_ratio": "40"}], y="height")
    images = [im for ax in result.figure.axes for im in ax.get_images()]
    assert len(images) == 1 and images[0].get_array().shape == (6, 5)


def test_path_marks_the_critical_point():
    import xarray as xr

    from sweepshell.plot.paths import _critical_point

    point = xr.Dataset({"critical_load": 0.8, "critical_deflection": 0.3})
    xv, yv = np.array([0.0, 0.2, 0.4]), np.array([0.0, 0.6, 1.0])
    assert _critical_point(point, xv, yv, "load", True) == (0.3, 0.8)  # stored critical state
    x, y = _critical_point(xr.Dataset({"critical_load": 0.8}), xv, yv, "load", False)
    assert (x, y) == (pytest.approx(0.3), 0.8)  # first crossing of the critical load along the path


def test_boundary_between_two_regimes_leaves_out_edges_to_a_third_and_repeats_no_vertex():
    # regimes 1 (stripes) and 3 (herringbone) of a film map, 4 (labyrinth) touching both
    codes = np.array([[1, 1, 1, 4, 4, 3, 4, 4], [1, 1, 1, 4, 3, 3, 4, 4], [1, 1, 1, 3, 4, 4, 4, 4],
                      [1, 1, 1, 4, 4, 4, 4, 3], [1, 1, 1, 3, 3, 3, 4, 3], [0, 0, 2, 1, 1, 1, 1, 1],
                      [0, 0, 0, 1, 1, 1, 1, 1], [0, 0, 0, 1, 1, 1, 1, 1]])[::-1].T
    xu = yu = np.arange(8.0)
    lines = trace_boundary(xu, yu, codes, 1, 3)
    vertices = np.concatenate(lines)
    assert len({tuple(v) for v in vertices}) == len(vertices)
    for u, v in vertices:
        i0, j0, i1, j1 = int(np.floor(u)), int(np.floor(v)), int(np.ceil(u)), int(np.ceil(v))
        assert {int(codes[i0, j0]), int(codes[i1, j1])} == {1, 3}
    pairs = {1, 3}
    edges = sum({int(codes[i, j]), int(codes[i + 1, j])} == pairs for i in range(7) for j in range(8)) + sum(
        {int(codes[i, j]), int(codes[i, j + 1])} == pairs for i in range(8) for j in range(7))
    assert len(vertices) == edges  # every A/B grid edge once, nothing else


def test_contour_labels_keep_off_the_regime_boundaries(column):
    from sweepshell.plot.regime_map import draw_regime_map

    result = draw_regime_map(open_sweep(column), "stiffness_ratio", "load_ratio", contour="margin",
                             at={"end": "pinned"})
    ax = result.figure.axes[0]
    boundary = np.concatenate([np.stack([np.log10(line.get_xdata()) / 4, np.asarray(line.get_ydata()) / 39.5], 1)
                               for line in ax.get_lines() if line.get_linewidth() == pytest.approx(1.4)])
    labels = [t for t in ax.texts if t.get_text()]
    assert labels
    for label in labels:
        x, y = label.get_position()
        distance = np.min(np.hypot(boundary[:, 0] - np.log10(x) / 4, boundary[:, 1] - y / 39.5))
        assert distance > 0.05, label.get_text()  # a twentieth of the frame away from any boundary


def test_points_most_starts_miss_are_marked_multistable(column):
    from sweepshell.plot.regime_map import draw_regime_map

    ds = open_sweep(column).copy()
    confidence = np.ones(ds["critical_load"].shape)
    confidence[2:5, 1:3, :] = 1 / 3
    ds["pattern_confidence"] = (ds["critical_load"].dims, confidence, {"units": "1"})
    fig = draw_regime_map(ds, "stiffness_ratio", "load_ratio", at={"end": "pinned"}).figure
    labels = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert any(label.startswith("multistable (6:") for label in labels)


def test_regime_fills_end_halfway_between_grid_points_not_in_cell_staircases():
    from sweepshell.plot.map_fill import bilinear_classes

    # regime 1 on the points with i + j >= 3 of a 3 × 3 grid: the region ends on the diagonal through the
    # midpoints of the edges joining the two regimes, where the boundary line runs
    values = np.add.outer(np.arange(3), np.arange(3)) >= 3
    grid = np.arange(3.0)
    centres = np.linspace(0.01, 1.99, 100)
    raster = bilinear_classes(grid, grid, values.astype(float), centres, centres)
    u, v = np.meshgrid(centres, centres, indexing="ij")
    clear = np.abs(u + v - 2.5) > 0.1
    np.testing.assert_array_equal(raster[clear], (u + v > 2.5)[clear].astype(float))
