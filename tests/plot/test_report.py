"""The HTML report parses, embeds decodable images and says what was computed; load-path plots."""

from __future__ import annotations

import base64
import io
from html.parser import HTMLParser

import matplotlib.image as mpimg
import numpy as np
import pytest

from sweepshell import CAUTION
from sweepshell.cli.main import main
from tests.conftest import compute_column_store


class Collector(HTMLParser):
    def __init__(self):
        super().__init__()
        self.images, self.headings, self.text, self.cells = [], [], [], []
        self._tag = None

    def handle_starttag(self, tag, attrs):
        self._tag = tag
        if tag == "img":
            self.images.append(dict(attrs))

    def handle_data(self, data):
        self.text.append(data)
        if self._tag in ("h1", "h2", "h3"):
            self.headings.append(data)
        if self._tag == "td":
            self.cells.append(data)


def test_report_is_self_contained_and_says_what_was_computed(three_axis_store, tmp_path, capsys):
    out = tmp_path / "report.html"
    assert main(["report", str(three_axis_store), "--out", str(out)]) == 0
    parser = Collector()
    parser.feed(out.read_text(encoding="utf-8"))
    parser.close()
    assert parser.headings[0] == "column3: winkler_column 1.0"
    assert {"What was computed", "Regime maps", "Boundaries", "Extreme points", "Provenance"} <= set(parser.headings)
    text = " ".join(parser.text)
    assert CAUTION.removeprefix("Caution: ") in text
    assert "286 grid points" in text  # 13 x 11 x 2
    assert len(parser.images) == 2  # one map per value of the named axis 'end'
    for img in parser.images:
        assert img["src"].startswith("data:image/png;base64,")
        image = mpimg.imread(io.BytesIO(base64.b64decode(img["src"].split(",", 1)[1])), format="png")
        assert image.ndim == 3 and image.shape[0] > 400 and np.std(image[..., :3]) > 0.05
    # extreme points: the largest critical load is at η = 1000 (P_cr = 63.778, Timoshenko & Gere 1961) for the
    # pinned column, but η > 500 is outside validity in this store, so the largest trusted one is at η = 464.2
    cells = parser.cells
    i = cells.index("critical_load", cells.index("min"))
    assert "stable / buckled — end = pinned" in parser.headings
    assert any(c.startswith("stiffness_ratio = 464.159") for c in cells)
    assert i >= 0


def test_report_refuses_a_bad_out_path(three_axis_store, tmp_path, capsys):
    assert main(["report", str(three_axis_store), "--out", str(tmp_path / "r.pdf")]) == 2
    assert main(["report", str(three_axis_store), "--out", str(tmp_path / "missing" / "r.html")]) == 2
    assert not list(tmp_path.rglob("*.html"))


def test_path_overlays_chosen_points_and_skips_untrusted_ones(three_axis_store, tmp_path, capsys):
    out = tmp_path / "paths.png"
    code = main(["path", str(three_axis_store), "--at", "stiffness_ratio=10,load_ratio=20,end=pinned",
                 "--at", "stiffness_ratio=100,load_ratio=0.5", "--at", "stiffness_ratio=1,end=weak,load_ratio=4",
                 "--out", str(out)])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert "no trusted path at stiffness_ratio = 100, load_ratio = 0.5" in captured.err  # fail_at = 0.5
    assert "load_ratio = 4.45 (nearest to 4)" in captured.err
    assert mpimg.imread(str(out)).ndim == 3
    from sweepshell import open_sweep
    from sweepshell.plot.paths import draw_load_paths

    result = draw_load_paths(open_sweep(three_axis_store),
                             [{"stiffness_ratio": "10", "load_ratio": "20", "end": "pinned"}])
    line = result.figure.axes[0].get_lines()[0]
    # the sampled path runs from zero to the critical load, P_cr(η = 10) = 6.5 (Timoshenko & Gere 1961)
    assert line.get_ydata()[0] == 0 and line.get_ydata()[-1] == pytest.approx(6.5)
    assert "(buckled)" in line.get_label()


def test_path_errors_are_one_line(three_axis_store, capsys):
    for argv in (["--y", "critical_load"], ["--at", "nope=1"], ["--at", "stiffness_ratio=100,load_ratio=0.5"]):
        assert main(["path", str(three_axis_store), *argv]) == 2, argv
        out, err = capsys.readouterr()
        assert out == "" and err.count("\n") == 1


ONE_AXIS = """\
name: column1
model: winkler_column
fixed: {end: pinned, load_ratio: 5.0}
axes:
  stiffness_ratio: {logspace: [-1, 3, 9]}
"""


def test_report_of_a_one_axis_store_draws_outputs_against_the_axis(tmp_path, capsys):
    store = compute_column_store(tmp_path, "column1", sweep_text=ONE_AXIS)
    out = tmp_path / "one.html"
    assert main(["report", str(store), "--out", str(out)]) == 0
    parser = Collector()
    parser.feed(out.read_text(encoding="utf-8"))
    assert [img["alt"] for img in parser.images] == ["critical_load against stiffness_ratio"]


def test_path_components_default_to_load_against_the_other_component():
    import xarray as xr

    from sweepshell.plot.paths import draw_load_paths

    lam = np.array([4.0, 8.0])
    sample = np.linspace(0.0, 1.0, 5)
    path = np.stack([np.stack([2 * sample * k, sample * k], axis=1) for k in (1.0, 2.0)])  # load = 2 deflection
    ds = xr.Dataset(
        {"load_path": (("shell_parameter", "path_sample", "path_component"), path, {"units": "1"}),
         "status": (("shell_parameter",), np.array([1, 1], dtype=np.uint8)),
         "regime": (("shell_parameter",), np.array([0, 1], dtype=np.int8))},
        coords={"shell_parameter": ("shell_parameter", lam, {"symbol": "λ"}),
                "path_component": ("path_component", np.array(["load", "deflection"], dtype=object))},
        attrs={"model": "made_up", "model_version": "0", "regimes": ["stable", "limit_point"]})
    result = draw_load_paths(ds, [{"shell_parameter": "4"}, {"shell_parameter": "8"}])
    ax = result.figure.axes[0]
    first, second = ax.get_lines()[:2]
    np.testing.assert_allclose(first.get_ydata(), 2 * first.get_xdata())
    assert second.get_xdata()[-1] == pytest.approx(2.0)
    assert ax.get_xlabel().startswith("deflection") and ax.get_ylabel().startswith("load")
    assert first.get_label() == "λ = 4  (stable)" and second.get_label() == "λ = 8  (limit point)"
    swapped = draw_load_paths(ds, [{"shell_parameter": "8"}], y="load_path:deflection", x="load_path:load")
    line = swapped.figure.axes[0].get_lines()[0]
    np.testing.assert_allclose(line.get_xdata(), 2 * line.get_ydata())
