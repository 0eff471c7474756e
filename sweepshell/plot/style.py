"""Shared look of sweepshell figures: palette, labels, title and caution footer.

The regime palette is the eight-colour set of Okabe & Ito (2008, "Color Universal Design"),
distinguishable with the common forms of colour blindness, lightened for filled regions so
boundary lines and contours stay readable on top. Untrusted points are grey; statuses have
distinct black marker shapes, so they read without colour.
"""

from __future__ import annotations

import re
from typing import TYPE_CHECKING, Any

from sweepshell.about import CAUTION, __version__
from sweepshell.errors import SweepshellError
from sweepshell.plot.layout import add_caution_footer
from sweepshell.plot.units import format_quantity, pretty_units
from sweepshell.store.metadata import ATTR, read_record

if TYPE_CHECKING:
    import xarray as xr
    from matplotlib.figure import Figure

__all__ = ["STATUS_MARKERS", "add_caution_footer", "axis_label", "make_figure", "mathtext", "regime_colors",
           "save_figure", "study_subtitle", "title_lines"]

#: Okabe–Ito colours in the order regimes take them (sky blue, orange, bluish green, reddish purple,
#: yellow, blue, vermillion); black is kept for lines and markers
OKABE_ITO = ("#56B4E9", "#E69F00", "#009E73", "#CC79A7", "#F0E442", "#0072B2", "#D55E00")
UNTRUSTED_COLOR = "#D9D9D9"
PENDING_COLOR = "#FFFFFF"
BOUNDARY_COLOR = "#1A1A1A"
CONTOUR_COLOR = "#3B3B3B"

#: marker, size and label of each untrustworthy status drawn on maps
STATUS_MARKERS: dict[str, tuple[str, float, str]] = {
    "not_converged": ("o", 18.0, "not converged"),
    "outside_validity": ("s", 10.0, "outside validity"),
    "failed": ("x", 22.0, "failed"),
}


def _lighten(color: str, amount: float) -> tuple[float, float, float]:
    from matplotlib.colors import to_rgb

    r, g, b = to_rgb(color)
    return (r + (1 - r) * amount, g + (1 - g) * amount, b + (1 - b) * amount)


def regime_colors(n: int, *, fill: bool = True) -> list[Any]:
    """Return ``n`` colour-blind-safe colours (lightened for fills)."""
    base = [OKABE_ITO[i % len(OKABE_ITO)] for i in range(n)]
    return [_lighten(c, 0.25) for c in base] if fill else list(base)


def mathtext(symbol: str) -> str:
    """Return a symbol with sub/superscripts as mathtext (``δ_d/h`` → ``$δ_{d}/h$``); others unchanged."""
    if not any(ch in symbol for ch in "_^") or any(ch in symbol for ch in "$\\{}"):
        return symbol
    return "$" + re.sub(r"([_^])(\w+)", r"\1{\2}", symbol) + "$"


def axis_label(name: str, attrs: dict[str, Any], units: str | None = None) -> str:
    """Return an axis label such as ``stiffness ratio η`` or ``thickness h [km]``.

    ``units`` replaces the stored units (an axis scaled by :func:`sweepshell.plot.units.set_axis_format`).
    """
    words = name.replace("_", " ")
    symbol = str(attrs.get("symbol", "")).strip()
    shown = pretty_units(str(attrs.get("units", ""))) if units is None else units
    label = f"{words}  {mathtext(symbol)}" if symbol else words
    if shown:
        label += f"  [{shown}]"
    return label


#: fixed axes rectangles (left, bottom, width, height in figure fractions): room for a legend on the
#: right and the caution footer below; fixed positions render several times faster than automatic layout
MAIN_AXES = (0.085, 0.2, 0.63, 0.68)
FIELD_AXES = (0.085, 0.2, 0.55, 0.68)
COLORBAR_AXES = (0.655, 0.2, 0.018, 0.68)


def make_figure(width: float = 7.4, height: float = 5.6) -> Figure:
    """Return an empty figure drawn with Agg (no display needed)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=100)
    FigureCanvasAgg(fig)
    return fig


def title_lines(attrs: dict[str, Any], what: str, cut: str = "") -> str:
    """Return the title: ``what — model version`` and up to two lines of the parameters that define the study."""
    head = f"{what} — {attrs.get('model', '?')} {attrs.get('model_version', '')}".rstrip()
    if not cut:
        return head
    # many fixed parameters: at most two lines, broken between parameters, the rest elided (the report lists
    # them all); the length that counts is the visible one (mathtext markup takes no room)
    lines: list[str] = []
    for item in cut.split(", "):
        if lines and len(_visible(lines[-1])) + 2 + len(_visible(item)) <= 92:
            lines[-1] += ", " + item
        else:
            lines.append(item)
    if len(lines) > 2:
        lines = [lines[0], lines[1] + ", …"]
    return head + "\n" + "\n".join(lines)


def _visible(text: str) -> str:
    return re.sub(r"[${}\\]|_(?={)", "", text)


def save_figure(fig: Figure, path: str) -> None:
    """Save as PNG (150 dpi) or SVG by the file's extension, the caution in the file's metadata.

    PNG files carry it as a ``Description`` text chunk, SVG files as Dublin Core ``description``,
    whether or not the footer is drawn.
    """
    caution = getattr(fig, "_sweepshell_caution", CAUTION)
    metadata = {"Description": caution, "Software": f"sweepshell {__version__}"}
    if str(path).lower().endswith(".svg"):
        metadata = {"Description": caution, "Creator": f"sweepshell {__version__}"}
    fig.savefig(path, dpi=150, metadata=metadata)


def describe_value(name: str, value: Any, attrs: dict[str, Any]) -> str:
    """Return ``ν = 0.3``, ``edge = clamped`` or ``T_e = 20 km``: symbol (else name) and value with units."""
    symbol = str(attrs.get("symbol", "")).strip()
    head = mathtext(symbol) if symbol else name.replace("_", " ")
    if not isinstance(value, (int, float)) or isinstance(value, bool):
        return f"{head} = {str(value).replace('_', ' ')}"
    return f"{head} = {format_quantity(float(value), str(attrs.get('units', '')))}"


def study_subtitle(ds: xr.Dataset, cuts: Any = ()) -> str:
    """Return the parameters that define what a figure shows, as one line.

    First the axes fixed for this view (``cuts``), then every fixed parameter of the study
    the model says defines it (:meth:`~sweepshell.models.base.SweepModel.study_parameters`),
    defaults included, so a figure reads without its sweep file.
    """
    parts = [describe_value(c.name, c.value, dict(ds[c.name].attrs)) for c in cuts]
    try:
        fixed = read_record(ds.attrs, ATTR.fixed, "{}")
    except ValueError:
        fixed = {}
    specs: dict[str, Any] = {}
    names: tuple[str, ...] = tuple(k for k, v in fixed.items() if v is not None)
    try:
        from sweepshell.models import get_model

        model = get_model(str(ds.attrs.get(ATTR.model)))
        specs = {p.name: p for p in model.parameters}
        names = model.study_parameters(fixed)
    except SweepshellError:  # a model this installation does not know: every fixed parameter
        pass
    axes = set(ds.dims)
    for name in names:
        if name in axes:
            continue
        spec = specs.get(name)
        attrs = {"symbol": spec.symbol, "units": spec.units} if spec is not None else {}
        parts.append(describe_value(name, fixed[name], attrs))
    return ", ".join(parts)
