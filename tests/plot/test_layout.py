"""Every figure type keeps all its text on the canvas, with long labels, wide ticks and log axes."""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell import open_sweep
from sweepshell.plot.layout import find_clipped_text, find_colliding_ticks, find_layout_problems, finish_figure
from sweepshell.plot.paths import draw_fields, draw_load_paths
from sweepshell.plot.regime_map import draw_output_lines, draw_regime_map
from sweepshell.plot.style import make_figure
from tests.conftest import FAULTY_OVERRIDES, compute_column_store

NARROW = """\
name: narrow
model: winkler_column
axes:
  stiffness_ratio: {logspace: [2, 2.6, 9]}
  load_ratio: {linspace: [0.5, 40, 6]}
  end: [pinned, weak]
"""

WIDE = """\
name: wide
model: winkler_column
axes:
  stiffness_ratio: {logspace: [-1, 3, 13]}
  load_ratio: {linspace: [0.5, 40, 7]}
  end: [pinned, weak]
"""


def stretched(ds):
    """Return the store with long names, symbols and units, wide numbers and a field output."""
    ds = ds.copy()
    long_symbol = "P_cr/P_E,longsubscript"
    ds["critical_load"] = ds["critical_load"] * 123456.789
    ds["critical_load"].attrs.update(symbol=long_symbol, units="N m-1",
                                     long_name="critical load over the Euler load")
    ds["margin"].attrs.update(units="Pa m-3", symbol="Δ_margin")
    ds["stiffness_ratio"].attrs["symbol"] = "η_foundation,very long subscript"
    ds["load_ratio"].attrs["symbol"] = "P/P_E applied to the column, a long description"
    ds.attrs["model"] = "winkler_column_with_a_rather_long_model_name_for_titles"
    ds.attrs["fixed_parameters_json"] = (
        '{"end": "pinned", "stiffness_ratio": 0.0, "load_ratio": 1.0, "an_unknown_parameter": 123456.789, '
        '"another_long_parameter_name": "a_long_categorical_value", "third_parameter": 0.001234}')
    sizes = (ds.sizes["stiffness_ratio"], ds.sizes["load_ratio"], ds.sizes["end"], 6, 5)
    field = np.sin(np.arange(np.prod(sizes), dtype=float)).reshape(sizes) * 2e-7
    ds["height"] = (("stiffness_ratio", "load_ratio", "end", "height_y", "height_x"), field,
                    {"units": "m", "symbol": "w", "long_name": "a height field"})
    return ds


@pytest.fixture(scope="module")
def stores(tmp_path_factory):
    folder = tmp_path_factory.mktemp("layout")
    wide = compute_column_store(folder, "wide", FAULTY_OVERRIDES, sweep_text=WIDE)
    narrow = compute_column_store(folder, "narrow", sweep_text=NARROW)
    return stretched(open_sweep(wide)), stretched(open_sweep(narrow)), wide


def figures(ds, every=True):
    yield "regime map + contour", draw_regime_map(ds, "stiffness_ratio", "load_ratio", contour="critical_load",
                                                 at={"end": "weak"}).figure
    yield "colour field", draw_regime_map(ds, "load_ratio", "stiffness_ratio", color="critical_load").figure
    if not every:
        return
    yield "lines, named series", draw_output_lines(ds, "stiffness_ratio", "critical_load", series="end",
                                                   at={"load_ratio": "20"}).figure
    yield "lines, numeric series", draw_output_lines(ds, "stiffness_ratio", "margin", series="load_ratio").figure
    yield "lines, integers", draw_output_lines(ds, "load_ratio", "mode_number", series="stiffness_ratio").figure
    yield "load path", draw_load_paths(ds, [{"stiffness_ratio": "100", "load_ratio": "20"},
                                            {"stiffness_ratio": "200", "load_ratio": "40", "end": "weak"}],
                                       y="load_path").figure
    yield "field images", draw_fields(ds, [{"load_ratio": "40"}, {"load_ratio": "40", "end": "weak"}],
                                      "height").figure


@pytest.mark.parametrize("which", [0, 1], ids=["four decades", "under a decade"])
def test_no_figure_text_leaves_the_canvas_and_no_ticks_collide(stores, which):
    ds = stores[which]
    for name, fig in figures(ds, every=which == 0):
        assert find_layout_problems(fig) == [], name
        assert any(t.get_gid() == "caution" for t in fig.texts), name


@pytest.mark.slow  # draws every figure of a report (about 10 s)
def test_report_figures_keep_their_text_on_the_canvas(stores, monkeypatch, tmp_path):
    from sweepshell.plot import report

    checked = []
    original = report._png

    def checking_png(fig):
        assert find_layout_problems(fig) == []
        checked.append(fig)
        return original(fig)

    monkeypatch.setattr(report, "_png", checking_png)
    report.write_report(stores[0], str(stores[2]))
    assert len(checked) >= 2


def test_the_checks_catch_clipped_text_and_colliding_ticks():
    fig = make_figure(4, 3)
    ax = fig.add_axes((0.0, 0.1, 1.0, 0.8))  # no room for the y tick labels
    ax.set_ylim(0, 1e6)
    ax.set_ylabel("a label that cannot fit on the left")
    assert find_clipped_text(fig)
    fig = make_figure(4, 3)
    ax = fig.add_axes((0.2, 0.2, 0.7, 0.7))
    ax.set_xticks(np.linspace(0, 1, 30))
    assert find_colliding_ticks(fig)
    finish_figure(fig)  # thins them
    assert find_colliding_ticks(fig) == []


def test_finishing_moves_the_axes_in_until_the_text_fits():
    fig = make_figure(4, 3)
    ax = fig.add_axes((0.0, 0.0, 1.0, 1.0))
    ax.set_ylim(0, 1e6)
    ax.set_title("a title\nof two lines")
    ax.set_xlabel("x label")
    ax.set_ylabel("y label")
    finish_figure(fig)
    assert find_clipped_text(fig) == []
    caution = next(t for t in fig.texts if t.get_gid() == "caution")
    renderer = fig.canvas.get_renderer()
    assert ax.xaxis.label.get_window_extent(renderer).y0 > caution.get_window_extent(renderer).y1
