"""The shape view: stored shapes at chosen points of a sweep, side by side.

Two kinds of stored shape are drawn, recognised by their extra dimensions:

- a cap's height field, w/h at the end of the path, over ``shape_radius`` (r/a) ×
  ``shape_angle`` (θ [rad]): shaded from above with contour lines, plus the meridian
  sections at θ = 0 and, when the wave number n is known, θ = π/n;
- a strip's cross-section over ``section_stage`` × ``section_xy`` × ``section_arc``: the
  deformed mid-surface (y, z) [m] unloaded, at the peak moment and in the fold.

A point is chosen per panel (nearest grid value for numbers, exact names for categories;
axes not named take their first value). Points whose status is not trusted or whose shape
is NaN get a panel saying so; a figure in which no point has a shape is refused.
"""

from __future__ import annotations

import logging
import math
import textwrap
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from sweepshell.about import CAUTION
from sweepshell.errors import QueryError
from sweepshell.models.base import TRUSTED_STATUSES, Status
from sweepshell.plot.shape_panels import draw_cap_panel, draw_missing_panel, draw_section_panel, section_limits
from sweepshell.plot.style import add_caution_footer, axis_label, title_lines
from sweepshell.query.slicing import AxisCut, slice_sweep
from sweepshell.query.table import describe_fields, regime_names
from sweepshell.store import metadata
from sweepshell.store.metadata import ATTR

if TYPE_CHECKING:
    import xarray as xr
    from matplotlib.figure import Figure

__all__ = [
    "CAP_DIMS",
    "SECTION_DIMS",
    "ShapeFigure",
    "ShapeOutput",
    "ShapePoint",
    "describe_point",
    "draw_shapes",
    "engineering_scale",
    "find_shape_output",
    "format_value",
    "pick_representative_points",
    "read_shape_point",
]

log = logging.getLogger(__name__)

#: units written with an engineering prefix (single symbols only: "mN m" would read ambiguously)
_PREFIXED_UNITS = frozenset({"m", "Pa", "N", "J", "W", "s"})
_PREFIXES = {-12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G", 12: "T"}
_DIMENSIONLESS = ("", "1", "-", "dimensionless")

CAP_DIMS = ("shape_radius", "shape_angle")
SECTION_DIMS = ("section_stage", "section_xy", "section_arc")
#: the most points drawn side by side in one figure
MAX_PANELS = 6
_WIDTH = {"cap": 3.3, "section": 3.7}      # inches per panel
_HEIGHT = {"cap": 7.0, "section": 4.0}
_MIN_WIDTH = 6.4
_CHARS_PER_INCH = 19                        # caution footer at 6.2 pt


@dataclass(frozen=True)
class ShapeOutput:
    """The store's shape output: its name and kind (``cap`` height field or strip ``section``)."""

    name: str
    kind: str


@dataclass(frozen=True)
class ShapePoint:
    """One chosen point: where it is, what the store says of it, and its shape (``None`` if there is none)."""

    cuts: tuple[AxisCut, ...]
    status: Status
    regime: str
    values: np.ndarray | None
    missing: str = ""
    wave_number: int | None = None

    def where(self) -> str:
        """Return the point's axis values in one line, e.g. ``shell_parameter = 9, max_indentation = 8``."""
        return ", ".join(c.describe().split(" (")[0] for c in self.cuts) or "the only point"


@dataclass(frozen=True)
class ShapeFigure:
    """A drawn shape figure, the points it shows and what the command line should report."""

    figure: Figure
    points: tuple[ShapePoint, ...]
    notes: tuple[str, ...] = ()


def engineering_scale(magnitude: float, units: str) -> tuple[float, str]:
    """Return ``(factor, unit)`` so that ``magnitude / factor`` lies in [1, 1000) in ``unit`` (``mm``, ``GPa``).

    Units that take no prefix (compound or dimensionless) come back unchanged with factor 1.
    """
    if units not in _PREFIXED_UNITS or not math.isfinite(magnitude) or magnitude <= 0:
        return 1.0, units
    power = max(min(3 * math.floor(math.log10(magnitude) / 3 + 1e-9), 12), -12)
    return 10.0**power, _PREFIXES[power] + units


def format_value(value: Any, units: str = "") -> str:
    """Return a value for a title: ``25.4 mm``, ``200 GPa``, ``0.3``, ``5`` (integers as integers), ``∞ m``."""
    if isinstance(value, str):
        return value
    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    unit = "" if units in _DIMENSIONLESS else units
    if math.isfinite(v) and v != 0:
        factor, unit = engineering_scale(abs(v), unit)
        v /= factor
    if math.isinf(v):
        text = "∞" if v > 0 else "−∞"
    elif v == int(v) and abs(v) < 1e4:
        text = str(int(v))
    else:
        text = f"{v:.4g}".replace("e+0", "e").replace("e-0", "e-")
    text = text.replace("-", "−")
    return f"{text} {unit}" if unit else text


def find_shape_output(ds: xr.Dataset) -> ShapeOutput:
    """Return the store's shape output.

    Raises
    ------
    QueryError
        If no output has the extra dimensions of a shape, or its sizes cannot be a shape.
    """
    info = describe_fields(ds)
    for name in info.path_outputs:
        extra = tuple(str(d) for d in ds[name].dims[len(info.axes):])
        if extra == CAP_DIMS:
            return ShapeOutput(name, "cap")
        if extra == SECTION_DIMS:
            if ds.sizes["section_xy"] != 2:
                raise QueryError(f"output {name!r} has {ds.sizes['section_xy']} values along section_xy; a section "
                                 "stores 2 (y, z); the store is not readable as a shape", field="store", value=name)
            return ShapeOutput(name, "section")
    raise QueryError("this store has no stored shape (an output over shape_radius × shape_angle or section_stage × "
                     "section_xy × section_arc); run a model that stores one (cap_postbuckling, curved_strip) or "
                     "draw paths with `sweepshell path`", field="store")


def _fixed_parameters(ds: xr.Dataset) -> dict[str, Any]:
    """Return the store's fixed parameters (empty when the record is missing or unreadable)."""
    try:
        fixed = metadata.read_record(ds.attrs, ATTR.fixed, "{}")
    except (TypeError, ValueError):
        return {}
    return dict(fixed) if isinstance(fixed, dict) else {}


def _wave_number(view: xr.Dataset, ds: xr.Dataset) -> int | None:
    """Return n ≥ 2 of the point's pattern: the output of the followed branch, else the parameter asked for."""
    if "branch_wave_number" in view.data_vars:
        n = float(view["branch_wave_number"].values)
        if math.isfinite(n):  # the branch followed; 0 = axisymmetric, whatever was asked for
            return int(n) if n >= 2 and n == int(n) else None
    candidates: list[Any] = []
    if "wave_number" in view.coords:
        candidates.append(view["wave_number"].values)
    candidates.append(_fixed_parameters(ds).get("wave_number"))
    for value in candidates:
        try:
            n = float(value)
        except (TypeError, ValueError):
            continue
        if math.isfinite(n) and n >= 2 and n == int(n):
            return int(n)
    return None


def read_shape_point(ds: xr.Dataset, output: ShapeOutput, at: Mapping[str, str]) -> ShapePoint:
    """Return the point of ``ds`` chosen by ``at`` with its shape, or the reason it has none."""
    view = slice_sweep(ds, [], at)
    status = Status(int(view.ds[metadata.STATUS_VAR].values))
    code = int(view.ds[metadata.REGIME_VAR].values)
    regimes = regime_names(ds)
    regime = regimes[code] if 0 <= code < len(regimes) else "none"
    n = _wave_number(view.ds, ds)
    if status not in TRUSTED_STATUSES:
        return ShapePoint(view.cuts, status, regime, None, f"status {status.name.replace('_', ' ')}", n)
    values = np.asarray(view.ds[output.name].values, dtype=float)
    drawable = values[:1] if output.kind == "section" else values  # later stages are NaN without limit point/fold
    if not np.any(np.isfinite(drawable)):
        return ShapePoint(view.cuts, status, regime, None, "none stored at this point (NaN)", n)
    return ShapePoint(view.cuts, status, regime, values, "", n)


def _coordinate(ds: xr.Dataset, dim: str, default: np.ndarray) -> np.ndarray:
    if dim in ds.coords and ds[dim].dtype.kind in "fiu":
        return np.asarray(ds[dim].values, dtype=float)
    return default


def describe_point(ds: xr.Dataset, point: ShapePoint, sep: str = ", ", *, symbols: bool = True) -> str:
    """Return the point's axis values with units, e.g. ``width  w = 20 mm, load = bend_equal``.

    ``symbols=False`` leaves out the symbols (drawn as mathtext in figures), for plain text such as HTML.
    """
    parts = []
    for cut in point.cuts:
        attrs = dict(ds[cut.name].attrs)
        name = axis_label(cut.name, {"symbol": attrs.get("symbol", "") if symbols else ""})
        parts.append(f"{name} = {format_value(cut.value, str(attrs.get('units', '')))}")
    return sep.join(parts) or "the only point"


def _panel_title(ds: xr.Dataset, point: ShapePoint) -> str:
    lines = [describe_point(ds, point, "\n")]
    if point.values is None:
        lines.append(point.missing)
    else:
        state = f"regime: {point.regime.replace('_', ' ')}"
        lines.append(state + (f",  n = {point.wave_number}" if point.wave_number else ""))
    return "\n".join(lines)


def _study_line(ds: xr.Dataset) -> str:
    """Return the single-valued axes, then the fixed parameters, that define the study, with units.

    The axes come first: a title elides what does not fit on two lines.
    """
    values: dict[str, Any] = {}
    units: dict[str, str] = {}
    try:
        from sweepshell.models import get_model

        units = {p.name: p.units for p in get_model(str(ds.attrs.get(ATTR.model))).parameters}
    except Exception:  # a model not installed here: values without units
        log.debug("model of the store not registered; fixed parameters drawn without units")
    for name in describe_fields(ds).axes:
        if ds.sizes[name] == 1:
            value = ds[name].values[0]
            values[name] = value.item() if hasattr(value, "item") else value
            units[name] = str(ds[name].attrs.get("units", ""))
    values.update({k: v for k, v in _fixed_parameters(ds).items() if k not in values})
    return ", ".join(f"{k} = {format_value(v, units.get(k, ''))}" for k, v in values.items() if v is not None)


def _section_scale(points: Sequence[ShapePoint], units: str) -> tuple[float, str]:
    sizes = [float(np.nanmax(np.abs(p.values))) for p in points if p.values is not None]
    return engineering_scale(max(sizes, default=1.0), units)


def draw_shapes(ds: xr.Dataset, points: Sequence[Mapping[str, str]]) -> ShapeFigure:
    """Draw the stored shape at each point, side by side, with the study in the title and the caution below.

    Parameters
    ----------
    ds
        A store Dataset with a shape output (see :func:`find_shape_output`).
    points
        One mapping per panel: axis name → value text (nearest grid value; unnamed axes at their first value).

    Raises
    ------
    QueryError
        For a store without a shape, an unknown axis or value, too many points, a single point without a
        shape, or when none of the points has one.
    """
    from matplotlib.figure import Figure
    from matplotlib.layout_engine import ConstrainedLayoutEngine

    output = find_shape_output(ds)
    points = list(points) or [{}]
    if len(points) > MAX_PANELS:
        raise QueryError(f"{len(points)} points asked for; one figure shows at most {MAX_PANELS} side by side; "
                         "draw the rest into another file", field="at", value=len(points))
    chosen = [read_shape_point(ds, output, at) for at in points]
    if all(p.values is None for p in chosen):
        detail = "; ".join(f"{p.where()}: {p.missing}" for p in chosen)
        raise QueryError(f"no shape to draw ({detail}); pick a point with a trusted result (see `sweepshell query "
                         "STORE --all`)", field="at")
    notes = [f"point {k + 1}: {c.describe()}" for k, p in enumerate(chosen) for c in p.cuts]
    notes += [f"no shape at {p.where()}: {p.missing}" for p in chosen if p.values is None]
    kind = output.kind
    width = max(_MIN_WIDTH, _WIDTH[kind] * len(chosen))
    chars = int(width * _CHARS_PER_INCH)
    footer = (len(textwrap.wrap(CAUTION, chars)) * 6.2 * 1.3 / 72 + 0.12) / _HEIGHT[kind]
    # constrained layout keeps every label inside its panel; the band below is the caution's
    engine = ConstrainedLayoutEngine(rect=(0.0, footer, 1.0, 1.0 - footer), w_pad=0.06, h_pad=0.06)
    fig = Figure(figsize=(width, _HEIGHT[kind]), dpi=100, layout=engine)
    add_caution_footer(fig, width_chars=chars)
    subs = fig.subfigures(1, len(chosen), squeeze=False)[0]
    if kind == "cap":
        radius = _coordinate(ds, CAP_DIMS[0], np.linspace(0.0, 1.0, ds.sizes[CAP_DIMS[0]]))
        m = ds.sizes[CAP_DIMS[1]]
        angle = _coordinate(ds, CAP_DIMS[1], 2 * math.pi * np.arange(m) / m)
    else:
        factor, unit = _section_scale(chosen, str(ds[output.name].attrs.get("units", "m")))
        limits = section_limits([p.values for p in chosen if p.values is not None], factor)
    for sub, point in zip(subs, chosen, strict=True):
        sub.suptitle(_panel_title(ds, point), fontsize=8.5, linespacing=1.3)
        if point.values is None:
            draw_missing_panel(sub, point.missing)
        elif kind == "cap":
            draw_cap_panel(sub, point.values, radius, angle, point.wave_number)
        else:
            draw_section_panel(sub, point.values, factor, unit, limits)
    what = "Shape w/h at max_indentation" if kind == "cap" else "Cross-section of the strip"
    fig.suptitle(title_lines(dict(ds.attrs), what, _study_line(ds)), x=0.01, ha="left", fontsize=9.5)
    return ShapeFigure(fig, tuple(chosen), tuple(notes))


def pick_representative_points(ds: xr.Dataset, output: ShapeOutput | None = None) -> list[tuple[str, dict[str, str]]]:
    """Return one point per regime with a stored shape: the one nearest the regime's median grid position.

    Positions are grid indices scaled to [0, 1] per axis, so every axis weighs the same whatever its
    units or spacing; only points with a trusted status and a finite shape qualify.

    Returns
    -------
    list of (regime name, ``--at`` mapping), in regime order.
    """
    output = output or find_shape_output(ds)
    axes = describe_fields(ds).axes
    status = np.asarray(ds[metadata.STATUS_VAR].values)
    codes = np.asarray(ds[metadata.REGIME_VAR].values)
    trusted = np.isin(status, [int(s) for s in TRUSTED_STATUSES])
    scale = np.array([max(ds.sizes[a] - 1, 1) for a in axes], dtype=float)
    picked = []
    for code, name in enumerate(regime_names(ds)):
        where = np.argwhere(trusted & (codes == code))
        if not len(where):
            continue
        position = where / scale
        order = np.argsort(np.linalg.norm(position - np.median(position, axis=0), axis=1), kind="stable")
        for row in where[order[:20]]:  # the nearest few suffice; a regime's shapes are NaN only exceptionally
            index = dict(zip(axes, (int(i) for i in row), strict=True))
            values = np.asarray(ds[output.name].isel(index).values, dtype=float)
            if np.any(np.isfinite(values[:1] if output.kind == "section" else values)):
                picked.append((name, {a: _at_text(ds[a].values[i]) for a, i in index.items()}))
                break
    return picked


def _at_text(value: Any) -> str:
    if isinstance(value, (float, np.floating)):
        return repr(float(value))
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    return str(value)
