"""A check that no text of a figure lies outside its canvas (clipped labels, titles, footers)."""

from __future__ import annotations

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.text import Text


def texts_outside_canvas(fig, tolerance: float = 1.0) -> list[str]:
    """Draw ``fig`` with Agg and return the visible, non-empty texts whose extent leaves the canvas."""
    canvas = FigureCanvasAgg(fig)
    canvas.draw()  # runs the layout engine as a save does
    renderer = canvas.get_renderer()
    width, height = fig.bbox.width, fig.bbox.height
    outside = []
    for text in fig.findobj(Text):
        if not text.get_visible() or not text.get_text().strip():
            continue
        box = text.get_window_extent(renderer)
        if box.x0 < -tolerance or box.y0 < -tolerance or box.x1 > width + tolerance or box.y1 > height + tolerance:
            outside.append(text.get_text())
    return outside
