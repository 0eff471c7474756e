"""The shape view: cap height fields and strip sections at chosen points, drawn from synthetic stores."""

from __future__ import annotations

import io
import math

import numpy as np
import pytest
from matplotlib.figure import Figure

from sweepshell import open_sweep
from sweepshell.errors import QueryError
from sweepshell.plot.layout import find_layout_problems
from sweepshell.plot.shape import (
    draw_shapes,
    engineering_scale,
    find_shape_output,
    format_value,
    pick_representative_points,
)
from sweepshell.plot.shape_panels import draw_cap_panel, meridian
from tests.plot.shape_stores import cap_field


def panels(fig, gid):
    return fig.findobj(lambda a: getattr(a, "get_gid", None) and a.get_gid() == gid)


def all_text(fig):
    return " ".join(t.get_text() for t in fig.findobj(lambda a: hasattr(a, "get_text") and hasattr(a, "get_fontsize")))


def test_cap_point_shaded_from_above_with_its_meridians(shape_stores):
    ds = open_sweep(shape_stores["cap"])
    result = draw_shapes(ds, [{"shell_parameter": "9.4", "max_indentation": "8"}])
    fig = result.figure
    assert len(panels(fig, "shape-field")) == 1 and len(panels(fig, "shape-meridian")) == 1
    assert find_layout_problems(fig) == []
    field = panels(fig, "shape-field")[0]
    assert field.get_aspect() == 1.0
    radius = np.linspace(0, 1, 24)
    angle = 2 * np.pi * np.arange(72) / 72
    expected = cap_field(8.0, 5, radius, angle)
    section = panels(fig, "shape-meridian")[0]
    lines = {line.get_label(): line for line in section.get_lines()}
    assert set(lines) >= {"θ = 0", "θ = π/5 (36°)"}  # n = 5 from the store's wave_number output
    np.testing.assert_allclose(lines["θ = 0"].get_ydata(), expected[:, 0])
    # θ = π/5 lies between stored angles (every 5°): linear in θ, so within (Δθ)²/8 · 25 · max amplitude
    between = -8 * (1 - radius**2) ** 2 - 2 * radius**2 * (1 - radius**2)
    np.testing.assert_allclose(lines["θ = π/5 (36°)"].get_ydata(), between, atol=0.025 * 2 * 0.25)
    text = all_text(fig)
    assert "shell parameter  λ = 9\n" in text  # nearest grid value, drawn as an integer
    assert "regime: stable postbuckling,  n = 5" in text
    assert "w/h" in text and "load = apex_force" in text and "Caution" in text
    assert "point 1: shell_parameter = 9 (nearest to 9.4)" in result.notes


def test_meridian_interpolates_periodically():
    angle = 2 * np.pi * np.arange(8) / 8
    field = np.tile(np.arange(8.0), (3, 1))
    np.testing.assert_allclose(meridian(field, angle, angle[3]), 3.0)
    np.testing.assert_allclose(meridian(field, angle, angle[7] + np.pi / 8), 3.5)  # halfway from 7 back to 0
    np.testing.assert_allclose(meridian(field, angle, -np.pi / 8), 3.5)


def test_field_colours_diverge_around_zero_for_two_signs_and_run_from_zero_for_one():
    radius, angle = np.linspace(0, 1, 24), 2 * np.pi * np.arange(72) / 72
    two_signed = 0.5 * np.outer(radius**2 * (1 - radius**2), np.cos(5 * angle)) - 0.1 * (1 - radius[:, None] ** 2)
    one_signed = -np.abs(two_signed) - 0.01
    scales = []
    for field in (two_signed, one_signed):
        fig = Figure()
        draw_cap_panel(fig, field, radius, angle, 5)
        mesh = fig.axes[0].collections[0]
        scales.append((mesh.get_cmap().name, mesh.norm.vmin, mesh.norm.vmax))
    big = np.abs(two_signed).max()
    assert scales[0] == ("RdBu_r", pytest.approx(-big), pytest.approx(big))
    assert scales[1] == ("viridis", pytest.approx(one_signed.min()), 0.0)


def test_a_field_with_holes_leaves_them_grey():
    radius, angle = np.linspace(0, 1, 24), 2 * np.pi * np.arange(72) / 72
    field = cap_field(2.0, 4, radius, angle)
    field[5, 10] = np.nan
    fig = Figure()
    draw_cap_panel(fig, field, radius, angle, 4)
    cells = fig.axes[0].collections[0].get_array()
    assert cells.shape == (24, 72) and int(np.ma.count_masked(cells)) == 1
    assert find_layout_problems(fig) == []


def test_several_points_side_by_side_with_a_panel_for_the_missing_one(shape_stores):
    ds = open_sweep(shape_stores["cap"])
    points = [{"shell_parameter": "9", "max_indentation": "8"}, {"shell_parameter": "20", "max_indentation": "20"},
              {"shell_parameter": "5", "max_indentation": "2"}]
    result = draw_shapes(ds, points)
    fig = result.figure
    assert len(panels(fig, "shape-field")) == 2 and len(panels(fig, "shape-meridian")) == 2
    assert len(panels(fig, "shape-missing")) == 1
    assert "no shape: status not converged" in all_text(fig)
    assert "no shape at shell_parameter = 20, max_indentation = 20: status not converged" in result.notes
    assert find_layout_problems(fig) == []
    # an axisymmetric limit-point cap: only the θ = 0 meridian
    last = panels(fig, "shape-meridian")[-1]
    assert [line.get_label() for line in last.get_lines() if not line.get_label().startswith("_")] == ["θ = 0"]


def test_strip_sections_in_millimetres_equal_aspect(shape_stores):
    ds = open_sweep(shape_stores["strip"])
    result = draw_shapes(ds, [{"width": "0.02", "load": "bend_opposite"}, {"width": "0.02", "load": "bend_equal"},
                              {"width": "0.04", "load": "bend_equal"}])
    fig = result.figure
    sections = panels(fig, "shape-section")
    assert len(sections) == 2 and len(panels(fig, "shape-missing")) == 1
    assert find_layout_problems(fig) == []
    folded, stiff = sections
    assert folded.get_xlabel() == "transverse coordinate y  [mm]" and folded.get_ylabel() == "height z  [mm]"
    assert folded.get_aspect() == 1.0
    # one scale side by side: the same limits on panels of the same size
    assert folded.get_xlim() == pytest.approx(stiff.get_xlim())
    assert folded.get_ylim() == pytest.approx(stiff.get_ylim())
    labels = [t.get_text() for t in folded.get_legend().get_texts()]
    assert labels == ["unloaded", "at the peak moment", "in the fold"]
    assert [t.get_text() for t in stiff.get_legend().get_texts()] == [
        "unloaded", "at the peak moment: none (no limit point)", "in the fold: none (no fold)"]
    unloaded = folded.get_lines()[0]
    np.testing.assert_allclose(unloaded.get_xdata()[[0, -1]], [-10.0, 10.0])         # 20 mm wide
    np.testing.assert_allclose(unloaded.get_ydata()[0], -1e3 * 0.01**2 / (2 * 0.025))  # arc depth in mm
    assert "width = 20 mm" in all_text(fig) and "no shape: status failed" in all_text(fig)


@pytest.mark.parametrize(("kind", "at", "message"), [
    ("cap", {"shell_parameter": "20", "max_indentation": "20"}, "status not converged"),
    ("cap", {"shell_parameter": "14", "max_indentation": "8"}, "none stored at this point (NaN)"),
    ("cap", {"thickness": "1"}, "'thickness' is not an axis of this store"),
    ("cap", {"shell_parameter": "abc"}, "is not a number"),
    ("strip", {"load": "twist"}, "no such value; use one of bend_opposite, bend_equal"),
    ("plain", {}, "this store has no stored shape"),
])
def test_refusals_name_the_problem(shape_stores, kind, at, message):
    with pytest.raises(QueryError, match=message.replace("(", r"\(").replace(")", r"\)")) as err:
        draw_shapes(open_sweep(shape_stores[kind]), [at])
    assert "\n" not in str(err.value)


def test_more_points_than_panels_is_refused(shape_stores):
    with pytest.raises(QueryError, match="at most 6"):
        draw_shapes(open_sweep(shape_stores["cap"]), [{"shell_parameter": "9"}] * 7)


def test_representative_points_are_median_points_with_a_shape(shape_stores):
    ds = open_sweep(shape_stores["cap"])
    picked = dict(pick_representative_points(ds))
    assert set(picked) == {"stable", "limit_point", "stable_postbuckling", "unstable_postbuckling"}
    assert picked["stable"] == {"shell_parameter": "14.0", "max_indentation": "2.0"}
    assert picked["limit_point"] == {"shell_parameter": "5.0", "max_indentation": "8.0"}
    # the median λ = 14 point holds no shape, the next nearest do; the not-converged λ = 20 point never counts
    assert picked["stable_postbuckling"]["shell_parameter"] in ("9.0", "20.0")
    assert picked["unstable_postbuckling"]["shell_parameter"] in ("9.0", "14.0")
    assert find_shape_output(ds).kind == "cap"
    assert find_shape_output(open_sweep(shape_stores["strip"])).kind == "section"


@pytest.mark.parametrize(("value", "units", "text"), [
    (0.0254, "m", "25.4 mm"), (2.0e11, "Pa", "200 GPa"), (1.5e-4, "m", "150 µm"), (5.0, "1", "5"),
    (0.3, "1", "0.3"), (math.inf, "m", "∞ m"), (7800.0, "kg m-3", "7800 kg m-3"), ("clamped", "", "clamped"),
    (-3.0, "", "−3"), (0.0, "m", "0 m"),
])
def test_quantities_read_with_engineering_prefixes(value, units, text):
    assert format_value(value, units) == text


def test_engineering_scale_puts_the_mantissa_in_one_to_a_thousand():
    assert engineering_scale(0.0123, "m") == (pytest.approx(1e-3), "mm")
    assert engineering_scale(999.0, "m") == (1.0, "m")
    assert engineering_scale(0.5, "N m") == (1.0, "N m")  # compound units take no prefix


def test_report_shows_one_shape_per_regime_and_keeps_the_caution(shape_stores, tmp_path, capsys):
    import base64
    import re

    import matplotlib.image as mpimg

    from sweepshell.about import CAUTION
    from sweepshell.cli.main import main

    out = tmp_path / "caps.html"
    assert main(["report", str(shape_stores["cap"]), "--out", str(out)]) == 0
    text = out.read_text(encoding="utf-8")
    headings = re.findall(r"<h2>(.*?)</h2>", text)
    assert headings.index("Shapes") == headings.index("Boundaries") + 1
    section = text[text.index("<h2>Shapes</h2>"):text.index("<h2>Extreme points</h2>")]
    images = re.findall(r"src='data:image/png;base64,([^']+)'", section)
    assert len(images) == 1
    image = mpimg.imread(io.BytesIO(base64.b64decode(images[0])), format="png")
    assert image.shape[1] > 1200 and np.std(image[..., :3]) > 0.05  # four panels side by side
    caption = re.findall(r"<figcaption class='muted'>(.*?)</figcaption>", section)[0]
    assert caption.startswith("stable: shell parameter = 14, max indentation = 2; limit point: shell parameter = 5")
    assert CAUTION.removeprefix("Caution: ") in text

    plain = tmp_path / "plain.html"
    assert main(["report", str(shape_stores["plain"]), "--out", str(plain)]) == 0
    assert "<h2>Shapes</h2>" not in plain.read_text(encoding="utf-8")
