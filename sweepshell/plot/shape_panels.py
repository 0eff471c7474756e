"""Panels of the shape view: a cap's height field seen from above with its meridian sections,
a strip's cross-sections, and the panel of a point without a shape.

Each function draws into a matplotlib (sub)figure; :mod:`sweepshell.plot.shape` arranges the
panels, titles and the caution. A field with both signs uses a diverging colour map
(ColorBrewer RdBu, readable with the common colour-vision deficiencies) centred on zero; a
one-signed field uses viridis over the range from zero to its extreme, so the flat edge sits
at one end of the colour bar.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

import numpy as np

from sweepshell.plot.style import CONTOUR_COLOR, OKABE_ITO, UNTRUSTED_COLOR

if TYPE_CHECKING:
    from matplotlib.figure import Figure, SubFigure

__all__ = ["STAGE_LABELS", "draw_cap_panel", "draw_missing_panel", "draw_section_panel", "meridian",
           "section_limits"]

#: what each stage of a stored cross-section shows (``section_stage`` 0, 1, 2)
STAGE_LABELS = ("unloaded", "at the peak moment", "in the fold")
_STAGE_STYLES: tuple[dict[str, Any], ...] = (
    {"color": "#6E6E6E", "linestyle": "--", "linewidth": 1.3},
    {"color": OKABE_ITO[5], "linestyle": "-", "linewidth": 1.8},
    {"color": OKABE_ITO[6], "linestyle": "-", "linewidth": 1.8},
)
#: what a NaN stage means (the stored section has no such stage at this point)
_NO_STAGE = {1: "none (no limit point)", 2: "none (no fold)"}
#: share of the largest |w| below which the other sign counts as round-off (one-signed field)
_SIGN_TOLERANCE = 0.02
_HALO_WIDTH = 2.6


def _color_scale(values: np.ndarray) -> tuple[Any, Any]:
    import matplotlib as mpl
    from matplotlib.colors import Normalize

    finite = values[np.isfinite(values)]
    lo, hi = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 0.0)
    big = max(abs(lo), abs(hi))
    if big == 0.0:
        return mpl.colormaps["RdBu_r"].with_extremes(bad=UNTRUSTED_COLOR), Normalize(-1.0, 1.0)
    if lo < -_SIGN_TOLERANCE * big and hi > _SIGN_TOLERANCE * big:
        return mpl.colormaps["RdBu_r"].with_extremes(bad=UNTRUSTED_COLOR), Normalize(-big, big)
    return mpl.colormaps["viridis"].with_extremes(bad=UNTRUSTED_COLOR), Normalize(min(lo, 0.0), max(hi, 0.0))


def meridian(field: np.ndarray, angle: np.ndarray, phi: float) -> np.ndarray:
    """Return the field along the meridian at angle ``phi`` [rad], linear between stored angles (periodic)."""
    m = len(angle)
    step = 2 * math.pi / m
    j = (phi - float(angle[0])) / step
    j0 = math.floor(j)
    t = j - j0
    return (1 - t) * field[:, j0 % m] + t * field[:, (j0 + 1) % m]


def _meridian_lines(n: int | None) -> list[tuple[float, str, str]]:
    lines = [(0.0, "θ = 0", "-")]
    if n is not None and n >= 2:
        lines.append((math.pi / n, f"θ = π/{n} ({180 / n:.3g}°)", "--"))
    return lines


def draw_cap_panel(sub: Figure | SubFigure, field: np.ndarray, radius: np.ndarray, angle: np.ndarray,
                   n: int | None) -> None:
    """Draw w/h over the disc seen from above (x, y = r cos θ, r sin θ) and along the meridians.

    Parameters
    ----------
    field
        w/h, shape (len(radius), len(angle)); rows at r/a, columns at θ [rad] evenly spaced over 2π.
    n
        Wave number of the pattern; with n ≥ 2 the meridian θ = π/n (between two crests) is drawn too.
    """
    from matplotlib import patheffects

    gs = sub.add_gridspec(2, 1, height_ratios=(3.0, 1.6))
    ax = sub.add_subplot(gs[0], gid="shape-field")
    cmap, norm = _color_scale(field)
    theta = np.append(angle, angle[0] + 2 * math.pi)
    w = np.concatenate([field, field[:, :1]], axis=1)
    x = radius[:, None] * np.cos(theta)[None, :]
    y = radius[:, None] * np.sin(theta)[None, :]
    if np.all(np.isfinite(w)):
        mesh = ax.pcolormesh(x, y, w, shading="gouraud", cmap=cmap, norm=norm, rasterized=True)
    else:  # gouraud shading cannot leave holes: polar cells around the stored values, missing ones grey
        r_edges = np.concatenate([radius[:1], 0.5 * (radius[1:] + radius[:-1]), radius[-1:]])
        half = math.pi / len(angle)
        t_edges = np.append(angle - half, angle[-1] + half)
        mesh = ax.pcolormesh(r_edges[:, None] * np.cos(t_edges)[None, :], r_edges[:, None] * np.sin(t_edges)[None, :],
                             np.ma.masked_invalid(field), shading="flat", cmap=cmap, norm=norm, rasterized=True)
    finite = w[np.isfinite(w)]
    if finite.size and float(np.ptp(finite)) > 0:
        ax.contour(x, y, np.ma.masked_invalid(w), levels=9, colors=CONTOUR_COLOR, linewidths=0.45, alpha=0.8)
    circle = np.linspace(0.0, 2 * math.pi, 241)
    ax.plot(radius[-1] * np.cos(circle), radius[-1] * np.sin(circle), color="#1A1A1A", linewidth=0.9)
    halo = [patheffects.withStroke(linewidth=_HALO_WIDTH, foreground="white")]
    lines = _meridian_lines(n)
    for phi, _, style in lines:
        ax.plot([0.0, radius[-1] * math.cos(phi)], [0.0, radius[-1] * math.sin(phi)], color="#1A1A1A",
                linestyle=style, linewidth=1.0, path_effects=halo)
    ax.set_aspect("equal")
    lim = 1.06 * float(radius[-1])
    ax.set_xlim(-lim, lim)
    ax.set_ylim(-lim, lim)
    ax.set_xticks([-1, 0, 1])
    ax.set_yticks([-1, 0, 1])
    ax.set_xlabel("x/a", labelpad=1)
    ax.set_ylabel("y/a", labelpad=1)
    ax.tick_params(direction="out", labelsize=8)
    cbar = sub.colorbar(mesh, ax=ax, location="bottom", shrink=0.8, aspect=24, pad=0.02)
    cbar.set_label("w/h", fontsize=9)
    cbar.ax.tick_params(labelsize=8)

    sec = sub.add_subplot(gs[1], gid="shape-meridian")
    for phi, label, style in lines:
        sec.plot(radius, meridian(field, angle, phi), color="#1A1A1A", linestyle=style, linewidth=1.4, label=label)
    sec.axhline(0.0, color="#BBBBBB", linewidth=0.6, zorder=0)
    sec.set_xlim(0.0, float(radius[-1]))
    sec.set_xlabel("r/a", labelpad=1)
    sec.set_ylabel("w/h")
    sec.grid(True, color="#E5E5E5", linewidth=0.6)
    sec.tick_params(direction="out", labelsize=8)
    sec.legend(fontsize=7.5, frameon=True, framealpha=0.9, edgecolor="#CCCCCC", loc="best")


def section_limits(sections: list[np.ndarray], factor: float) -> tuple[tuple[float, float], tuple[float, float]]:
    """Return the (y, z) limits that hold every section drawn in ``value / factor`` units, with a margin."""
    y = np.concatenate([s[:, 0].ravel() for s in sections]) / factor
    z = np.concatenate([s[:, 1].ravel() for s in sections]) / factor
    y, z = y[np.isfinite(y)], z[np.isfinite(z)]
    margin = 0.06 * max(float(np.ptp(y)), float(np.ptp(z)), 1e-300)
    return ((float(y.min()) - margin, float(y.max()) + margin), (float(z.min()) - margin, float(z.max()) + margin))


def draw_section_panel(sub: Figure | SubFigure, section: np.ndarray, factor: float, unit: str,
                       limits: tuple[tuple[float, float], tuple[float, float]]) -> None:
    """Draw the cross-section of each stage: height z against the transverse coordinate y, equal aspect.

    Parameters
    ----------
    section
        Shape (stages, 2, stations): ``[:, 0]`` y [m], ``[:, 1]`` z [m]; a stage that is all NaN (no limit
        point, no fold) is named in the legend instead of drawn.
    factor, unit
        Lengths are drawn as ``value / factor`` in ``unit`` (e.g. 1e-3, ``mm``).
    limits
        (y, z) limits shared by the panels of one figure (:func:`section_limits`), so equal lengths look
        equal side by side; equal aspect widens one of them to fit the panel.
    """
    from matplotlib.lines import Line2D

    ax = sub.add_subplot(gid="shape-section")
    handles = []
    for k in range(section.shape[0]):
        label = STAGE_LABELS[k] if k < len(STAGE_LABELS) else f"stage {k}"
        style = _STAGE_STYLES[k % len(_STAGE_STYLES)]
        y, z = section[k, 0], section[k, 1]
        keep = np.isfinite(y) & np.isfinite(z)
        if not np.any(keep):
            handles.append(Line2D([], [], color="none", label=f"{label}: {_NO_STAGE.get(k, 'not stored')}"))
            continue
        (line,) = ax.plot(y[keep] / factor, z[keep] / factor, label=label, **style)
        handles.append(line)
    ax.set_xlim(*limits[0])
    ax.set_ylim(*limits[1])
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xlabel(f"transverse coordinate y  [{unit}]", labelpad=1)
    ax.set_ylabel(f"height z  [{unit}]")
    ax.grid(True, color="#E5E5E5", linewidth=0.6)
    ax.tick_params(direction="out", labelsize=8)
    ax.legend(handles=handles, fontsize=7.5, frameon=True, framealpha=0.9, edgecolor="#CCCCCC", loc="best")


def draw_missing_panel(sub: Figure | SubFigure, reason: str) -> None:
    """Fill a panel with one line saying why the point has no shape."""
    ax = sub.add_subplot(gid="shape-missing")
    ax.set_axis_off()
    ax.text(0.5, 0.5, f"no shape: {reason}", ha="center", va="center", fontsize=9, color="#444444",
            transform=ax.transAxes, wrap=True)
