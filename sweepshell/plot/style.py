"""Shared look of sweepshell figures: palette, labels, title and caution footer.

The regime palette is the eight-colour set of Okabe & Ito (2008, "Color Universal Design"),
distinguishable with the common forms of colour blindness, lightened for filled regions so
boundary lines and contours stay readable on top. Untrusted points are grey; statuses have
distinct black marker shapes, so they read without colour.
"""

from __future__ import annotations

import re
import textwrap
from typing import TYPE_CHECKING, Any

from sweepshell.about import CAUTION

if TYPE_CHECKING:
    from matplotlib.figure import Figure

__all__ = ["STATUS_MARKERS", "add_caution_footer", "axis_label", "make_figure", "regime_colors"]

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


def _mathtext(symbol: str) -> str:
    if not any(ch in symbol for ch in "_^") or any(ch in symbol for ch in "$\\{}"):
        return symbol
    return "$" + re.sub(r"_(\w+)", r"_{\1}", symbol) + "$"


def axis_label(name: str, attrs: dict[str, Any]) -> str:
    """Return an axis label such as ``stiffness ratio η`` or ``thickness h [m]``."""
    words = name.replace("_", " ")
    symbol = str(attrs.get("symbol", "")).strip()
    units = str(attrs.get("units", "")).strip()
    label = f"{words}  {_mathtext(symbol)}" if symbol else words
    if units and units not in ("1", "-", "dimensionless"):
        label += f"  [{units}]"
    return label


#: fixed axes rectangles (left, bottom, width, height in figure fractions): room for a legend on the
#: right and the caution footer below; fixed positions render several times faster than automatic layout
MAIN_AXES = (0.085, 0.2, 0.63, 0.68)
FIELD_AXES = (0.085, 0.2, 0.55, 0.68)
COLORBAR_AXES = (0.655, 0.2, 0.018, 0.68)


def make_figure(width: float = 7.4, height: float = 5.6) -> Figure:
    """Return an empty figure drawn with Agg (no display needed)."""
    from matplotlib.figure import Figure

    return Figure(figsize=(width, height), dpi=100)


def add_caution_footer(fig: Figure, width_chars: int = 125) -> None:
    """Write the caution text under the plot in small grey type."""
    text = "\n".join(textwrap.wrap(CAUTION, width_chars))
    fig.text(0.5, 0.012, text, fontsize=6.2, color="#555555", ha="center", va="bottom", linespacing=1.25,
             gid="caution")


def title_lines(attrs: dict[str, Any], what: str, cut: str = "") -> str:
    """Return the two-line title: ``what — model version`` and the fixed values."""
    head = f"{what} — {attrs.get('model', '?')} {attrs.get('model_version', '')}".rstrip()
    if not cut:
        return head
    # many fixed parameters: at most two wrapped lines, the rest elided (the report lists them all)
    lines = textwrap.wrap(cut, 84, break_on_hyphens=False)
    if len(lines) > 2:
        lines = [lines[0], textwrap.shorten(" ".join(lines[1:]), 82, placeholder=" …")]
    return head + "\n" + "\n".join(lines)


def save_figure(fig: Figure, path: str) -> None:
    """Save as PNG (150 dpi) or SVG by the file's extension."""
    fig.savefig(path, dpi=150)
