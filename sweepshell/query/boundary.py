"""Boundaries between two regimes on a two-axis view, as polylines, located below the grid spacing.

Tracing. On the grid of a slice, the indicator f = +1 where the regime is A, −1 where it is
B and undefined elsewhere (other regimes, untrusted points) is contoured at f = 0 (contourpy,
in the coordinates where the axes are evenly spaced, i.e. log10 for log axes). Every vertex
of those polylines lies halfway along a grid edge joining an A point and a B point.

Locating. Each such edge brackets the boundary. Points already evaluated on the edge (the
store's point list, from refinement or earlier bisections) narrow the bracket first; then
``bisections`` rounds of bisection, each one batched model evaluation of every edge still
open, halve it. The vertex moves to the middle of its final bracket, whose half-width is
reported: after k halvings of an edge of spacing h the error is at most h/2^(k+1) (common
practice, no source) — unless the regime changes more than once along the edge.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from sweepshell.errors import QueryError

__all__ = ["Boundary", "BoundaryLine", "EvaluatorFactory", "RegimeEvaluator", "find_boundary", "locate_boundary",
           "trace_boundary"]

#: evaluates the regime (code, −1 when untrusted) at points given by their two axis values
RegimeEvaluator = Callable[[np.ndarray, np.ndarray], np.ndarray]

#: builds the regime evaluator of one view from the fixed values of its other axes and the two axis names;
#: the caller supplies it (the engine runs models, this layer only reads)
EvaluatorFactory = Callable[[Mapping[str, Any], str, str], RegimeEvaluator]


@dataclass(frozen=True)
class BoundaryLine:
    """One polyline of a boundary.

    Attributes
    ----------
    x, y
        Vertex coordinates in axis values.
    along
        Per vertex, 0 if its bracket runs along the x axis, 1 along the y axis.
    low, high
        Per vertex, the bracket ends along that axis (axis values): the boundary lies between.
    """

    x: np.ndarray
    y: np.ndarray
    along: np.ndarray
    low: np.ndarray
    high: np.ndarray


@dataclass(frozen=True)
class Boundary:
    """The boundary between regimes ``between[0]`` and ``between[1]`` on a two-axis view."""

    x_axis: str
    y_axis: str
    between: tuple[str, str]
    lines: list[BoundaryLine] = field(default_factory=list)
    evaluations: int = 0
    bisections: int = 0

    @property
    def n_vertices(self) -> int:
        return sum(len(line.x) for line in self.lines)


def trace_boundary(xu: np.ndarray, yu: np.ndarray, codes: np.ndarray, a: int, b: int) -> list[np.ndarray]:
    """Return the polylines (k × 2 arrays in unit coordinates) between codes ``a`` and ``b``.

    Parameters
    ----------
    xu, yu
        Grid coordinates of the two axes in evenly-spaced units (length nx, ny).
    codes
        Regime codes, shape (nx, ny); any code other than ``a``/``b`` is outside both regimes.
    """
    import contourpy

    f = np.full(codes.shape, np.nan)
    f[codes == a] = 1.0
    f[codes == b] = -1.0
    if len(xu) < 2 or len(yu) < 2 or not (np.any(f > 0) and np.any(f < 0)):
        return []
    z = np.ma.masked_invalid(f.T)
    gen = contourpy.contour_generator(x=np.asarray(xu, float), y=np.asarray(yu, float), z=z,
                                      line_type=contourpy.LineType.Separate)
    lines = [np.asarray(line, dtype=float) for line in gen.lines(0.0)]
    return _keep_a_b_edges(lines, xu, yu, codes, a, b)


def _keep_a_b_edges(lines: list[np.ndarray], xu: np.ndarray, yu: np.ndarray, codes: np.ndarray, a: int,
                    b: int) -> list[np.ndarray]:
    """Keep the vertices on grid edges joining an A and a B point, each vertex once.

    The contour of the masked indicator also runs through cells with a third regime at a
    corner; those vertices sit on edges to that regime or inside the cell and are no part of
    the A/B boundary,
    so a polyline is split where they are dropped. A vertex already kept (polylines meeting
    at a cell) is not repeated.
    """
    kept: list[np.ndarray] = []
    seen: set[tuple[float, float]] = set()
    for line in lines:
        if len(line) < 2:
            continue
        ix0, iy0, ix1, iy1 = _edges_of_vertices(line, xu, yu)
        pair = np.sort(np.stack([codes[ix0, iy0], codes[ix1, iy1]], 1), axis=1)
        good = (pair[:, 0] == min(a, b)) & (pair[:, 1] == max(a, b))
        # a vertex inside a cell (a saddle or a masked corner) lies on no grid edge
        on_x = np.min(np.abs(line[:, :1] - xu[None, :]), axis=1) <= 1e-9 * max(1.0, float(np.ptp(xu)))
        on_y = np.min(np.abs(line[:, 1:] - yu[None, :]), axis=1) <= 1e-9 * max(1.0, float(np.ptp(yu)))
        good &= on_x | on_y
        run: list[np.ndarray] = []
        for k in range(len(line)):
            key = (round(float(line[k, 0]), 12), round(float(line[k, 1]), 12))
            if good[k] and key not in seen:
                seen.add(key)
                run.append(line[k])
                continue
            if run:
                kept.append(np.array(run))
            run = []
        if run:  # a single vertex is a lone A/B edge between other regimes: still a bracket
            kept.append(np.array(run))
    return kept


def _edges_of_vertices(line: np.ndarray, xu: np.ndarray, yu: np.ndarray) -> tuple[np.ndarray, ...]:
    """Return, per vertex, the grid edge it lies on: (ix0, iy0, ix1, iy1)."""
    u, v = line[:, 0], line[:, 1]
    tol_y = 1e-9 * max(1.0, float(np.ptp(yu)))
    jy = np.clip(np.searchsorted(yu, v), 0, len(yu) - 1)
    jy_near = np.where(np.abs(yu[np.maximum(jy - 1, 0)] - v) < np.abs(yu[jy] - v), np.maximum(jy - 1, 0), jy)
    on_row = np.abs(yu[jy_near] - v) <= tol_y
    ix_left = np.clip(np.searchsorted(xu, u) - 1, 0, len(xu) - 2)
    jx = np.clip(np.searchsorted(xu, u), 0, len(xu) - 1)
    jx_near = np.where(np.abs(xu[np.maximum(jx - 1, 0)] - u) < np.abs(xu[jx] - u), np.maximum(jx - 1, 0), jx)
    iy_low = np.clip(np.searchsorted(yu, v) - 1, 0, len(yu) - 2)
    ix0 = np.where(on_row, ix_left, jx_near)
    ix1 = np.where(on_row, ix_left + 1, jx_near)
    iy0 = np.where(on_row, jy_near, iy_low)
    iy1 = np.where(on_row, jy_near, iy_low + 1)
    return ix0, iy0, ix1, iy1


def locate_boundary(x_axis: str, y_axis: str, x_values: np.ndarray, y_values: np.ndarray, log: tuple[bool, bool],
                    codes: np.ndarray, regimes: tuple[str, ...], between: tuple[str, str], *,
                    known: Mapping[str, np.ndarray] | None = None, evaluate: RegimeEvaluator | None = None,
                    bisections: int = 6) -> Boundary:
    """Trace the boundary between two regimes on a grid slice and locate it below the spacing.

    Parameters
    ----------
    x_axis, y_axis
        Axis names.
    x_values, y_values
        Grid values of the two axes.
    log
        Whether each axis is log-spaced (brackets are halved in log10 then).
    codes
        Regime codes on the grid, shape (nx, ny), −1 where untrusted.
    regimes
        The model's regime names.
    between
        The two regime names.
    known
        Points already evaluated in this slice: ``x``, ``y`` (axis values) and ``regime`` codes.
    evaluate
        Evaluates the regime at new points; without it only known points narrow the brackets.
    bisections
        Rounds of bisection per bracket.
    """
    from sweepshell.query.slicing import to_unit

    a, b = _check_request(regimes, between, bisections)
    xu, yu = to_unit(x_values, log[0]), to_unit(y_values, log[1])
    polylines = trace_boundary(xu, yu, codes, a, b)
    if not polylines:
        return Boundary(x_axis, y_axis, between, [], 0, bisections)
    sizes = [len(p) for p in polylines]
    allv = np.concatenate(polylines)
    ix0, iy0, ix1, iy1 = _edges_of_vertices(allv, xu, yu)
    # orient every bracket from its A end (t = 0) to its B end (t = 1)
    a_first = codes[ix0, iy0] == a
    pa = np.stack([np.where(a_first, xu[ix0], xu[ix1]), np.where(a_first, yu[iy0], yu[iy1])], axis=1)
    pb = np.stack([np.where(a_first, xu[ix1], xu[ix0]), np.where(a_first, yu[iy1], yu[iy0])], axis=1)
    valid = (codes[ix0, iy0] != codes[ix1, iy1]) & np.isin(codes[ix0, iy0], [a, b]) & np.isin(codes[ix1, iy1], [a, b])
    lo = np.zeros(len(allv))
    hi = np.ones(len(allv))
    if known is not None and len(known.get("regime", ())):
        lo, hi = _narrow(pa, pb, lo, hi, known, log, a, b)
    evaluations = 0
    if evaluate is not None:
        evaluations = _bisect(pa, pb, lo, hi, valid.copy(), evaluate, bisections, log, a, b)
    lines = _to_lines(pa, pb, lo, hi, (iy0 != iy1).astype(np.int8), log, sizes)
    return Boundary(x_axis, y_axis, between, lines, evaluations, bisections)


def _check_request(regimes: tuple[str, ...], between: tuple[str, str], bisections: int) -> tuple[int, int]:
    """Return the codes of the two regimes asked for; raise QueryError for a bad request."""
    for name in between:
        if name not in regimes:
            raise QueryError(f"--between {name!r} is not a regime of this model; use two of {', '.join(regimes)}",
                             field="between", value=name, allowed=", ".join(regimes))
    if between[0] == between[1]:
        raise QueryError(f"--between names {between[0]!r} twice; give two different regimes", field="between",
                         value=list(between))
    if bisections < 0 or bisections > 40:
        raise QueryError(f"--bisections={bisections} must be between 0 and 40", field="bisections",
                         value=bisections)
    return regimes.index(between[0]), regimes.index(between[1])


def _bisect(pa: np.ndarray, pb: np.ndarray, lo: np.ndarray, hi: np.ndarray, active: np.ndarray,
            evaluate: RegimeEvaluator, bisections: int, log: tuple[bool, bool], a: int, b: int) -> int:
    """Halve the brackets ``(lo, hi)`` in place by evaluating their midpoints; return the evaluations made."""
    from sweepshell.query.slicing import from_unit

    evaluations = 0
    for _ in range(bisections):
        idx = np.flatnonzero(active & (hi - lo > 1e-12))
        if idx.size == 0:
            break
        mid = 0.5 * (lo[idx] + hi[idx])
        pos = pa[idx] + mid[:, None] * (pb[idx] - pa[idx])
        got = np.asarray(evaluate(from_unit(pos[:, 0], log[0]), from_unit(pos[:, 1], log[1])))
        evaluations += idx.size
        lo[idx] = np.where(got == a, mid, lo[idx])
        hi[idx] = np.where(got == b, mid, hi[idx])
        active[idx[(got != a) & (got != b)]] = False  # a third regime inside: the bracket stops here
    return evaluations


def _to_lines(pa: np.ndarray, pb: np.ndarray, lo: np.ndarray, hi: np.ndarray, along: np.ndarray,
              log: tuple[bool, bool], sizes: list[int]) -> list[BoundaryLine]:
    """Return the polylines (axis values) through the bracket midpoints, with the brackets' ends."""
    from sweepshell.query.slicing import from_unit

    t = 0.5 * (lo + hi)
    pos = pa + t[:, None] * (pb - pa)
    ends = np.stack([pa + lo[:, None] * (pb - pa), pa + hi[:, None] * (pb - pa)])
    ends_along = np.where(along[None, :] == 0, ends[:, :, 0], ends[:, :, 1])
    low_u, high_u = np.minimum(ends_along[0], ends_along[1]), np.maximum(ends_along[0], ends_along[1])
    low = np.where(along == 0, from_unit(low_u, log[0]), from_unit(low_u, log[1]))
    high = np.where(along == 0, from_unit(high_u, log[0]), from_unit(high_u, log[1]))
    x_out, y_out = from_unit(pos[:, 0], log[0]), from_unit(pos[:, 1], log[1])
    lines = []
    start = 0
    for n in sizes:
        s = slice(start, start + n)
        lines.append(BoundaryLine(x=x_out[s], y=y_out[s], along=along[s], low=low[s], high=high[s]))
        start += n
    return lines


def _narrow(pa: np.ndarray, pb: np.ndarray, lo: np.ndarray, hi: np.ndarray, known: Mapping[str, np.ndarray],
            log: tuple[bool, bool], a: int, b: int) -> tuple[np.ndarray, np.ndarray]:
    """Shrink each bracket with the known points lying on its edge."""
    from sweepshell.query.slicing import to_unit

    ku = to_unit(np.asarray(known["x"], float), log[0])
    kv = to_unit(np.asarray(known["y"], float), log[1])
    kr = np.asarray(known["regime"])
    by_row: dict[float, np.ndarray] = {}
    by_col: dict[float, np.ndarray] = {}
    for key, group in ((kv, by_row), (ku, by_col)):
        order = np.argsort(key, kind="stable")
        values, starts = np.unique(key[order], return_index=True)
        for value, chunk in zip(values, np.split(order, starts[1:]), strict=True):
            group[float(value)] = chunk
    lo, hi = lo.copy(), hi.copy()
    for i in range(len(pa)):
        horizontal = pa[i, 1] == pb[i, 1]
        fixed, axis = (pa[i, 1], 0) if horizontal else (pa[i, 0], 1)
        members = (by_row if horizontal else by_col).get(float(fixed))
        if members is None:
            continue
        coord = (ku if horizontal else kv)[members]
        length = pb[i, axis] - pa[i, axis]
        t = (coord - pa[i, axis]) / length
        inside = (t > 0) & (t < 1)
        if not np.any(inside):
            continue
        ts = np.concatenate([[0.0], t[inside], [1.0]])
        rs = np.concatenate([[a], kr[members][inside], [b]])
        order = np.argsort(ts, kind="stable")
        ts, rs = ts[order], rs[order]
        # the first step from an A point to a B point, walking from the A end
        steps = np.flatnonzero((rs[:-1] == a) & (rs[1:] == b))
        if steps.size:
            lo[i], hi[i] = ts[steps[0]], ts[steps[0] + 1]
    return lo, hi


def boundary_to_records(boundary: Boundary, extra: Mapping[str, Any] | None = None) -> dict[str, Any]:
    """Return a JSON-ready description of a boundary (axes named, polylines with brackets)."""
    axes = (boundary.x_axis, boundary.y_axis)
    return {
        **dict(extra or {}),
        "x_axis": boundary.x_axis,
        "y_axis": boundary.y_axis,
        "between": list(boundary.between),
        "bisections": boundary.bisections,
        "model_evaluations": boundary.evaluations,
        "lines": [{boundary.x_axis: line.x.tolist(), boundary.y_axis: line.y.tolist(),
                   "bracket_axis": [axes[int(k)] for k in line.along],
                   "bracket_low": line.low.tolist(), "bracket_high": line.high.tolist()}
                  for line in boundary.lines],
    }


def slice_codes(view: Any) -> np.ndarray:
    """Return the regime codes of a (sliced) store Dataset, −1 where the status is not trustworthy."""
    from sweepshell.models.base import TRUSTED_STATUSES
    from sweepshell.store import metadata

    status = np.asarray(view[metadata.STATUS_VAR].values)
    regime = np.asarray(view[metadata.REGIME_VAR].values).astype(np.int64)
    return np.where(np.isin(status, sorted(int(s) for s in TRUSTED_STATUSES)), regime, -1)


def known_points(points: Mapping[str, np.ndarray] | None, fixed: Mapping[str, Any], x_axis: str,
                 y_axis: str) -> dict[str, np.ndarray] | None:
    """Return the trusted point-list entries of a slice as ``x``, ``y``, ``regime`` arrays."""
    from sweepshell.models.base import TRUSTED_STATUSES
    from sweepshell.query.slicing import points_in_slice
    from sweepshell.store import metadata

    idx = points_in_slice(points, fixed)
    if points is None or idx is None or idx.size == 0:
        return None
    status = np.asarray(points[metadata.STATUS_VAR])[idx]
    ok = np.isin(status, sorted(int(s) for s in TRUSTED_STATUSES))
    out = {"x": np.asarray(points[x_axis], float)[idx][ok], "y": np.asarray(points[y_axis], float)[idx][ok],
           "regime": np.asarray(points[metadata.REGIME_VAR]).astype(np.int64)[idx][ok]}
    if "level" in points:
        out["level"] = np.asarray(points["level"]).astype(np.int64)[idx][ok]
    return out


def find_boundary(ds: Any, x_axis: str, y_axis: str, between: tuple[str, str], *,
                  at: Mapping[str, str] | None = None, bisections: int = 6,
                  evaluator: EvaluatorFactory | None = None) -> tuple[Boundary, Any]:
    """Return the boundary between two regimes of a store on the view (x_axis, y_axis).

    The query layer never runs a model: new evaluations come only from an ``evaluator`` its
    caller passes in (:func:`sweepshell.engine.evaluate.store_evaluator`). Without one the
    boundary uses the grid and the stored off-grid points only.

    Parameters
    ----------
    ds
        A store Dataset (from :func:`sweepshell.open_sweep`).
    x_axis, y_axis
        The axes of the view; every other axis is fixed by ``at`` (nearest value) or at its first value.
    between
        Two regime names.
    at
        ``name → value`` text for the fixed axes.
    bisections
        Rounds of bisection with new model evaluations (0: use only stored points); used only with an
        ``evaluator``.
    evaluator
        Builds the view's evaluator from the fixed values of the other axes and the two axis names
        (see :data:`EvaluatorFactory`); ``None`` allows no new evaluations.

    Returns
    -------
    (Boundary, SweepSlice)
    """
    from sweepshell.query.slicing import slice_sweep
    from sweepshell.query.table import read_store_points, regime_names

    for name in (x_axis, y_axis):
        if name in ds.data_vars:
            raise QueryError(f"{name!r} is an output; a boundary lives on two axes", field="axis", value=name)
    view = slice_sweep(ds, [x_axis, y_axis], at)
    for name in (x_axis, y_axis):
        if view.ds[name].dtype.kind not in "fiu":
            raise QueryError(f"axis {name!r} holds names, not numbers; a boundary needs two numeric axes",
                             field="axis", value=name)
    known = known_points(read_store_points(ds), view.fixed_values, x_axis, y_axis)
    evaluate = None
    if evaluator is not None and bisections > 0:
        evaluate = evaluator(view.fixed_values, x_axis, y_axis)
    boundary = locate_boundary(x_axis, y_axis, np.asarray(view.ds[x_axis].values, float),
                               np.asarray(view.ds[y_axis].values, float), (view.log[0], view.log[1]),
                               slice_codes(view.ds), regime_names(ds), between, known=known, evaluate=evaluate,
                               bisections=bisections if evaluate is not None else 0)
    return boundary, view
