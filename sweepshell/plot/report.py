"""A self-contained HTML report of a store: what was computed, regime maps, boundaries, extremes, caution.

Images are embedded as base64 PNG, so the single file can be mailed or archived. Boundaries
in the report use the stored points only (no model evaluations): run ``sweepshell boundary``
or ``sweepshell refine`` first to sharpen them.
"""

from __future__ import annotations

import base64
import html
import io
import itertools
import json
from typing import TYPE_CHECKING, Any

import numpy as np

from sweepshell.about import CAUTION
from sweepshell.errors import QueryError
from sweepshell.query.boundary import find_boundary
from sweepshell.query.table import describe_fields, select_points
from sweepshell.store import metadata
from sweepshell.store.metadata import ATTR

if TYPE_CHECKING:
    import xarray as xr
    from matplotlib.figure import Figure

__all__ = ["write_report"]

_MAX_MAPS = 4
_MAX_VERTICES = 25
_SHAPES_PER_FIGURE = 4

_STYLE = """
body { font-family: system-ui, -apple-system, "Segoe UI", sans-serif; max-width: 1000px; margin: 2em auto;
       color: #1a1a1a; line-height: 1.45; padding: 0 1em; }
h1 { font-size: 1.6em; margin-bottom: 0.2em; } h2 { font-size: 1.2em; margin-top: 1.8em;
     border-bottom: 1px solid #ddd; padding-bottom: 0.2em; }
table { border-collapse: collapse; margin: 0.6em 0; font-size: 0.92em; }
th, td { border: 1px solid #ddd; padding: 0.25em 0.6em; text-align: left; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
.caution { background: #fff6e0; border-left: 4px solid #E69F00; padding: 0.8em 1em; }
img { max-width: 100%; } pre { background: #f6f6f6; padding: 0.8em; overflow-x: auto; font-size: 0.85em; }
.muted { color: #666; }
"""


def _png(fig: Figure) -> str:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=110, metadata={"Description": CAUTION})
    return base64.b64encode(buffer.getvalue()).decode("ascii")


def _fmt(v: Any) -> str:
    if isinstance(v, (float, np.floating)):
        return "" if not np.isfinite(v) else f"{float(v):.6g}"
    return html.escape(str(v))


def _table(header: list[str], rows: list[list[Any]]) -> str:
    head = "".join(f"<th>{html.escape(h)}</th>" for h in header)
    body = "".join(
        "<tr>" + "".join(f'<td class="num">{_fmt(v)}</td>' if isinstance(v, (int, float, np.number))
                         and not isinstance(v, bool) else f"<td>{_fmt(v)}</td>" for v in row) + "</tr>"
        for row in rows)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _map_views(ds: xr.Dataset, info: Any) -> list[tuple[str, str, dict[str, str]]]:
    numeric = [a for a in info.axes if ds[a].dtype.kind in "fiu" and ds.sizes[a] > 1]
    if len(numeric) < 2:
        return []
    x, y = numeric[0], numeric[1]
    named = [a for a in info.axes if a not in (x, y) and ds[a].dtype.kind not in "fiu" and ds.sizes[a] > 1]
    if not named:
        return [(x, y, {})]
    values = [[str(v) for v in ds[a].values] for a in named]
    return [(x, y, dict(zip(named, combo, strict=True))) for combo in itertools.islice(itertools.product(*values),
                                                                                       _MAX_MAPS)]


def _line_plots(ds: xr.Dataset, info: Any) -> str:
    """Line plots of the first outputs for stores with a single numeric axis."""
    from sweepshell.plot.output_lines import draw_output_lines

    numeric = [a for a in info.axes if ds[a].dtype.kind in "fiu" and ds.sizes[a] > 1]
    if not numeric or not info.scalar_outputs:
        return "<p>The store has no numeric axis with several values; no figure.</p>"
    preferred = [o for o in ("critical_load", "knockdown") if o in info.scalar_outputs]
    # only outputs with values at trusted points make figures (a flexure store has no critical load)
    codes = np.asarray(ds[metadata.REGIME_VAR].values) >= 0
    has_data = [o for o in info.scalar_outputs
                if np.isfinite(np.where(codes, np.asarray(ds[o].values, float), np.nan)).any()]
    outputs = ([o for o in preferred if o in has_data] or has_data)[:2]
    if not outputs:
        return "<p>No scalar output has a value at a trusted point; no figure.</p>"
    html_parts = ["<p class='muted'>One numeric axis: outputs drawn against it instead of a regime map.</p>"]
    for output in outputs:
        result = draw_output_lines(ds, numeric[0], output)
        html_parts.append(f"<figure><img alt='{html.escape(output)} against {html.escape(numeric[0])}' "
                          f"src='data:image/png;base64,{_png(result.figure)}'></figure>")
    return "\n".join(html_parts)


def _shape_section(ds: xr.Dataset) -> list[str]:
    """Shapes at one representative point per regime, for stores that hold a shape (none otherwise)."""
    from sweepshell.plot.shape import describe_point, draw_shapes, find_shape_output, pick_representative_points

    try:
        output = find_shape_output(ds)
    except QueryError:
        return []
    picked = pick_representative_points(ds, output)
    parts = ["<h2>Shapes</h2>"]
    if not picked:
        return [*parts, "<p>No point with a trusted result holds a shape.</p>"]
    parts.append("<p class='muted'>One point per regime: the trusted point with a stored shape nearest the "
                 "regime's median position on the grid. Draw others with <code>sweepshell shape</code>.</p>")
    for start in range(0, len(picked), _SHAPES_PER_FIGURE):
        chunk = picked[start:start + _SHAPES_PER_FIGURE]
        result = draw_shapes(ds, [at for _, at in chunk])
        where = "; ".join(f"{name.replace('_', ' ')}: {describe_point(ds, point, symbols=False)}"
                          for (name, _), point in zip(chunk, result.points, strict=True))
        parts.append(f"<figure><img alt='stored shapes at representative points' "
                     f"src='data:image/png;base64,{_png(result.figure)}'><figcaption class='muted'>"
                     f"{html.escape(where)}</figcaption></figure>")
    return parts


def write_report(ds: xr.Dataset, store_path: str) -> str:
    """Return the HTML report of a store as one self-contained string."""
    from sweepshell.store.summary import summarize_store

    info = describe_fields(ds)
    summary = summarize_store(store_path)
    attrs = dict(ds.attrs)
    title = f"{attrs.get(ATTR.sweep_name, 'sweep')}: {attrs.get(ATTR.model)} {attrs.get(ATTR.model_version)}"
    caution = f"<div class='caution'><strong>Caution.</strong> {html.escape(CAUTION.removeprefix('Caution: '))}</div>"
    parts = [f"<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'><title>{html.escape(title)}</title>"
             f"<style>{_STYLE}</style></head><body>",
             f"<h1>{html.escape(title)}</h1>",
             f"<p class='muted'>store {html.escape(store_path)} · created {html.escape(str(attrs.get(ATTR.created)))}"
             f" · sweepshell {html.escape(str(attrs.get(ATTR.tool)))}</p>",
             caution]
    parts += _computed_section(ds, info, summary, store_path)
    parts += _maps_and_boundaries(ds, info)
    parts.extend(_shape_section(ds))
    parts += _extremes_section(ds, info)
    parts.append("<h2>Provenance</h2>")
    parts.append(f"<pre>{html.escape(str(attrs.get(ATTR.sweep_yaml, '')))}</pre>")
    parts.append(f"<p class='muted'>model settings {html.escape(json.dumps(summary['settings']))}</p>")
    parts.append(caution + "</body></html>")
    return "\n".join(parts)


def _computed_section(ds: xr.Dataset, info: Any, summary: dict[str, Any], store_path: str) -> list[str]:
    """What was computed: model, settings and fixed values, the axes, and the points by status."""
    from sweepshell.store.points import read_count

    attrs = dict(ds.attrs)
    parts = ["<h2>What was computed</h2>"]
    model_rows: list[list[Any]] = [["model", attrs.get(ATTR.model)], ["model version", attrs.get(ATTR.model_version)],
                                   ["regimes", ", ".join(info.regimes)]]
    model_rows += [[f"setting {k}", v] for k, v in summary["settings"].items()]
    model_rows += [[f"fixed {k}", v] for k, v in summary["fixed"].items()]
    parts.append(_table(["", "value"], model_rows))
    axis_rows = []
    by_name = {a["name"]: a for a in summary["axes"]}
    for a in (by_name[name] for name in info.axes):
        coord = ds[a["name"]].attrs
        axis_rows.append([a["name"], coord.get("symbol", ""), coord.get("units", ""), a["size"], a["min"], a["max"],
                          coord.get("spacing", "")])
    parts.append(_table(["axis", "symbol", "units", "values", "min", "max", "spacing"], axis_rows))
    counts = [[name, n] for name, n in summary["counts"].items() if n]
    off_grid = read_count(store_path)
    parts.append(f"<p>{summary['total']} grid points, {summary['complete_fraction']:.1%} final"
                 f"{'' if summary['complete'] else ' (run the sweep again to finish)'}; {off_grid} points "
                 "evaluated off the grid (refinement, boundary bisection).</p>")
    parts.append(_table(["status", "points"], counts))
    return parts


def _maps_and_boundaries(ds: xr.Dataset, info: Any) -> list[str]:
    """Regime maps (or output lines for one numeric axis) and the vertices of the boundaries on them."""
    from sweepshell.plot.regime_map import draw_regime_map

    parts = ["<h2>Regime maps</h2>"]
    views = _map_views(ds, info)
    if not views:
        parts.append(_line_plots(ds, info))
    boundary_sections = []
    for x, y, at in views:
        result = draw_regime_map(ds, x, y, at=at, contour=None)
        cut = result.view.describe_cuts()
        parts.append(f"<figure><img alt='regime map over {html.escape(x)} and {html.escape(y)}' "
                     f"src='data:image/png;base64,{_png(result.figure)}'><figcaption class='muted'>"
                     f"{html.escape(cut or 'all axes shown')}</figcaption></figure>")
        boundary_sections += _boundary_tables(ds, info, x, y, at, cut)
    parts.append("<h2>Boundaries</h2>")
    parts.extend(boundary_sections or ["<p>No boundary between two regimes on these maps.</p>"])
    return parts


def _boundary_tables(ds: xr.Dataset, info: Any, x: str, y: str, at: dict[str, str], cut: str) -> list[str]:
    """One table of vertices per pair of regimes with a boundary on this map (the first few vertices)."""
    sections = []
    for a, b in itertools.combinations(info.regimes, 2):
        boundary, _ = find_boundary(ds, x, y, (a, b), at=at, bisections=0)
        if not boundary.lines:
            continue
        rows = []
        for i, line in enumerate(boundary.lines):
            for k in range(len(line.x)):
                rows.append([i, float(line.x[k]), float(line.y[k]), float(line.low[k]), float(line.high[k]),
                             (x, y)[int(line.along[k])]])
        shown = rows[:_MAX_VERTICES]
        more = f" (first {_MAX_VERTICES} of {len(rows)} vertices; export all with `sweepshell boundary`)" \
            if len(rows) > _MAX_VERTICES else ""
        sections.append(
            f"<h3>{html.escape(a)} / {html.escape(b)}{' — ' + html.escape(cut) if cut else ''}</h3>"
            f"<p class='muted'>{len(boundary.lines)} polyline(s){html.escape(more)}</p>"
            + _table(["line", x, y, "bracket low", "bracket high", "bracket along"], shown))
    return sections


def _extremes_section(ds: xr.Dataset, info: Any) -> list[str]:
    """The smallest and largest value of each scalar output over the trusted points, and where."""
    parts = ["<h2>Extreme points</h2><p class='muted'>Smallest and largest value of each scalar output over "
             "the points with a trustworthy status.</p>"]
    rows = []
    for output in info.scalar_outputs:
        for label, sort in (("min", output), ("max", "-" + output)):
            top = select_points(ds, f"{output} == {output}", [output, "regime"], sort=sort, limit=1)
            if len(top):
                row = top.iloc[0]
                where = ", ".join(f"{a} = {_fmt(row[a])}" for a in info.axes)
                rows.append([output, label, float(row[output]), str(row["regime"]), where])
    parts.append(_table(["output", "", "value", "regime", "at"], rows) if rows else "<p>No trusted points.</p>")
    return parts
