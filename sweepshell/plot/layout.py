"""Finishing a figure so that nothing is clipped, and the checks the tests use.

Figures are drawn on fixed axes rectangles (several times faster than automatic layout);
:func:`finish_figure` then measures what was actually drawn — tick labels, axis labels,
titles, legends and colour bars — and moves the axes in until every piece of text lies on
the canvas and above the caution footer. Tick labels that would run into each other are
thinned first. :func:`find_clipped_text` and :func:`find_colliding_ticks` are the checks,
reusable by any figure's tests.
"""

from __future__ import annotations

import textwrap
from typing import TYPE_CHECKING, Any

from sweepshell.about import CAUTION

if TYPE_CHECKING:
    from matplotlib.axis import Axis
    from matplotlib.backend_bases import RendererBase
    from matplotlib.figure import Figure
    from matplotlib.text import Text
    from matplotlib.transforms import Bbox

__all__ = ["add_caution_footer", "find_clipped_text", "find_colliding_ticks", "find_layout_problems", "finish_figure",
           "visible_texts"]

_PAD = 4.0          # pixels kept free at the canvas edges
_CAUTION_GID = "caution"


def _renderer(fig: Figure) -> RendererBase:
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    if not isinstance(fig.canvas, FigureCanvasAgg):
        FigureCanvasAgg(fig)
    fig.draw_without_rendering()
    return fig.canvas.get_renderer()  # type: ignore[attr-defined]


def _shown_ticks(axis: Axis) -> list[Text]:
    """Tick labels that are drawn: visible, non-empty, at a location inside the view."""
    low, high = sorted(axis.get_view_interval())
    span = (high - low) or 1.0
    labels = []
    for ticks in (axis.get_major_ticks(), axis.get_minor_ticks()):
        for tick in ticks:
            loc = tick.get_loc()
            if loc is None or not (low - 1e-9 * span <= loc <= high + 1e-9 * span):
                continue
            for label in (tick.label1, tick.label2):
                if label.get_visible() and label.get_text().strip():
                    labels.append(label)
    return labels


def visible_texts(fig: Figure) -> list[Text]:
    """Every text artist the figure draws (tick labels only where a tick is shown)."""
    from matplotlib.text import Text

    texts: list[Text] = []
    tick_labels: set[int] = set()
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            for tick in (*axis.get_major_ticks(), *axis.get_minor_ticks()):
                tick_labels.update((id(tick.label1), id(tick.label2)))
            if ax.get_visible() and axis.get_visible():
                texts.extend(_shown_ticks(axis))
    for artist in fig.findobj(lambda a: isinstance(a, Text)):
        if isinstance(artist, Text) and id(artist) not in tick_labels and artist.get_visible() \
                and artist.get_text().strip():
            texts.append(artist)
    return texts


def find_layout_problems(fig: Figure) -> list[str]:
    """Return every clipped text and every pair of colliding tick labels (one draw; empty: none)."""
    renderer = _renderer(fig)
    return find_clipped_text(fig, renderer=renderer) + find_colliding_ticks(fig, renderer=renderer)


def find_clipped_text(fig: Figure, tolerance: float = 0.5, *, renderer: RendererBase | None = None) -> list[str]:
    """Return a description of every text artist whose extent leaves the canvas (empty: none)."""
    renderer = renderer or _renderer(fig)
    width, height = fig.bbox.width, fig.bbox.height
    clipped = []
    for text in visible_texts(fig):
        box = text.get_window_extent(renderer)
        if box.x0 < -tolerance or box.y0 < -tolerance or box.x1 > width + tolerance or box.y1 > height + tolerance:
            clipped.append(f"{text.get_text()!r} at ({box.x0:.0f}, {box.y0:.0f})–({box.x1:.0f}, {box.y1:.0f}) "
                           f"outside {width:.0f}×{height:.0f}")
    return clipped


def _collisions(labels: list[Text], renderer: RendererBase, gap: float = 1.0) -> list[tuple[str, str]]:
    boxes = sorted(((t.get_window_extent(renderer), t.get_text()) for t in labels), key=lambda b: (b[0].x0,
                                                                                                 b[0].y0))
    hits = []
    for i, (a, ta) in enumerate(boxes):
        for b, tb in boxes[i + 1:]:
            if a.x0 < b.x1 + gap and b.x0 < a.x1 + gap and a.y0 < b.y1 + gap and b.y0 < a.y1 + gap:
                hits.append((ta, tb))
    return hits


def find_colliding_ticks(fig: Figure, *, renderer: RendererBase | None = None) -> list[str]:
    """Return pairs of tick labels of one axis that touch or overlap (empty: none)."""
    renderer = renderer or _renderer(fig)
    hits = []
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            hits += [f"{a!r} / {b!r}" for a, b in _collisions(_shown_ticks(axis), renderer)]
    return hits


def add_caution_footer(fig: Figure, width_chars: int | None = None) -> None:
    """Write the caution text under the plot in small grey type, wrapped to the figure's width."""
    if width_chars is None:
        width_chars = int(16.5 * fig.get_figwidth())  # 6.2 pt type: about 17 characters per inch
    text = "\n".join(textwrap.wrap(CAUTION, width_chars))
    fig.text(0.5, 0.012, text, fontsize=6.2, color="#555555", ha="center", va="bottom", linespacing=1.25,
             gid=_CAUTION_GID)


def _thin_ticks(axis: Axis, renderer: RendererBase) -> bool:
    """Use fewer ticks on an axis whose labels collide; return whether anything changed."""
    from matplotlib.ticker import LogLocator, MaxNLocator

    labels = _shown_ticks(axis)
    if not _collisions(labels, renderer):
        return False
    locator = axis.get_major_locator()
    n = max(2, len(labels) // 2 + 1)
    if axis.get_scale() == "log":
        subs = getattr(locator, "_subs", None)
        steps = {4: (1.0, 2.0, 5.0), 3: (1.0, 3.0), 2: (1.0,)}
        if subs is not None and len(subs) in steps and len(subs) > 1:
            axis.set_major_locator(LogLocator(base=10, subs=steps[len(subs)], numticks=12))
        else:
            axis.set_major_locator(LogLocator(base=10, numticks=n))
    else:
        integer = bool(getattr(locator, "_integer", False))
        axis.set_major_locator(MaxNLocator(nbins=max(1, n - 1), steps=[1, 2, 2.5, 5, 10], integer=integer))
    return True


def _extent(artist: Any, renderer: RendererBase) -> Bbox:
    return artist.get_window_extent(renderer)


def _shrink_wide_titles(fig: Figure, renderer: RendererBase, width: float) -> bool:
    """Set titles that run past the right edge in smaller type (down to 6 pt); return whether any changed."""
    titles: list[Text] = [getattr(ax, name) for ax in fig.axes for name in ("title", "_left_title", "_right_title")]
    if getattr(fig, "_suptitle", None) is not None:
        titles.append(fig._suptitle)  # type: ignore[attr-defined]
    changed = False
    for title in titles:
        if not title.get_text().strip():
            continue
        box = title.get_window_extent(renderer)
        room = width - _PAD - max(box.x0, _PAD)
        if box.x1 > width - _PAD and box.width > 0 and float(title.get_fontsize()) > 6.0:
            title.set_fontsize(max(6.0, float(title.get_fontsize()) * room / box.width * 0.98))
            if box.x0 < _PAD:
                title.set_x(title.get_position()[0] + (_PAD - box.x0) / width)
            changed = True
    return changed


def finish_figure(fig: Figure, *, caution: bool = True) -> Figure:
    """Add the caution footer (unless ``caution`` is false), thin colliding ticks and fit the axes.

    Every text the figure draws ends inside the canvas with a small margin and above the
    footer; the axes keep their relative arrangement (legends and colour bars move with the
    axes they belong to). The caution is also recorded for the file's metadata
    (:func:`sweepshell.plot.style.save_figure`), with or without the footer.
    """
    if caution:
        add_caution_footer(fig)
    fig._sweepshell_caution = CAUTION  # type: ignore[attr-defined]
    renderer = _renderer(fig)
    for _ in range(3):
        changed = False
        for ax in fig.axes:
            for axis in (ax.xaxis, ax.yaxis):
                changed |= _thin_ticks(axis, renderer)
        if not changed:
            break
        renderer = _renderer(fig)
    width, height = fig.bbox.width, fig.bbox.height
    for _ in range(5):
        if _shrink_wide_titles(fig, renderer, width):
            renderer = _renderer(fig)
        texts = visible_texts(fig)
        footer = [t for t in texts if t.get_gid() == _CAUTION_GID]
        floor = max((_extent(t, renderer).y1 for t in footer), default=0.0) + _PAD
        boxes = [_extent(t, renderer) for t in texts if t.get_gid() != _CAUTION_GID]
        boxes += [_extent(leg, renderer) for leg in fig.legends]
        boxes += [_extent(ax.get_legend(), renderer) for ax in fig.axes if ax.get_legend() is not None]
        if not boxes:
            break
        over_left = max(0.0, _PAD - min(b.x0 for b in boxes))
        over_right = max(0.0, max(b.x1 for b in boxes) - (width - _PAD))
        over_bottom = max(0.0, floor - min(b.y0 for b in boxes))
        over_top = max(0.0, max(b.y1 for b in boxes) - (height - _PAD))
        if max(over_left, over_right, over_bottom, over_top) < 0.5:
            break
        positions = [ax.get_position() for ax in fig.axes]
        x0, x1 = min(p.x0 for p in positions), max(p.x1 for p in positions)
        y0, y1 = min(p.y0 for p in positions), max(p.y1 for p in positions)
        nx0, nx1 = x0 + (over_left + 1) / width, x1 - (over_right + 1) / width
        ny0, ny1 = y0 + (over_bottom + 1) / height, y1 - (over_top + 1) / height
        if nx1 - nx0 < 0.2 * (x1 - x0) or ny1 - ny0 < 0.2 * (y1 - y0):
            break  # text larger than the figure: leave the figure as it is rather than collapse the axes
        sx, sy = (nx1 - nx0) / (x1 - x0), (ny1 - ny0) / (y1 - y0)
        for ax, p in zip(fig.axes, positions, strict=True):
            ax.set_position((nx0 + (p.x0 - x0) * sx, ny0 + (p.y0 - y0) * sy, p.width * sx, p.height * sy))
        renderer = _renderer(fig)
    return fig
