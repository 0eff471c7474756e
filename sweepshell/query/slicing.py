"""Two-dimensional (or one-dimensional) views of a store: chosen axes kept, the others fixed.

``--at name=value`` fixes an axis at the grid value nearest to ``value`` (by name for
categorical axes); an axis neither kept nor given is fixed at its first value. Every choice
is reported, so a figure or an export always says where it was cut.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from sweepshell.errors import QueryError
from sweepshell.store import metadata

if TYPE_CHECKING:
    import xarray as xr

__all__ = ["AxisCut", "SweepSlice", "from_unit", "parse_at", "slice_sweep", "to_unit"]


@dataclass(frozen=True)
class AxisCut:
    """How a fixed axis was chosen: what was asked for and the grid value used."""

    name: str
    asked: Any
    value: Any
    index: int

    def describe(self) -> str:
        """Return e.g. ``shell_parameter = 6.47 (nearest to 6.5)``."""
        value = _fmt(self.value)
        if self.asked is None:
            return f"{self.name} = {value} (first value; choose with --at {self.name}=...)"
        if isinstance(self.value, str) or _same(self.asked, self.value):
            return f"{self.name} = {value}"
        return f"{self.name} = {value} (nearest to {_fmt(self.asked)})"


@dataclass(frozen=True)
class SweepSlice:
    """A view of a store with some axes kept and the others fixed.

    Attributes
    ----------
    ds
        The sliced Dataset (kept axes only, in the order asked for).
    axes
        The kept axis names.
    cuts
        How each other axis was fixed.
    log
        Per kept axis, whether its values were given in log spacing.
    """

    ds: xr.Dataset
    axes: tuple[str, ...]
    cuts: tuple[AxisCut, ...] = ()
    log: tuple[bool, ...] = ()
    fixed_values: dict[str, Any] = field(default_factory=dict)

    def describe_cuts(self) -> str:
        """Return the fixed axes in one line (empty if none)."""
        return "; ".join(c.describe() for c in self.cuts)


def _fmt(v: Any) -> str:
    return f"{v:.6g}" if isinstance(v, float) else str(v)


def _same(a: Any, b: Any) -> bool:
    try:
        return math.isclose(float(a), float(b), rel_tol=1e-12, abs_tol=0.0)
    except (TypeError, ValueError):
        return bool(a == b)


def parse_at(items: Sequence[str] | None) -> dict[str, str]:
    """Parse ``name=value`` items of ``--at`` into a mapping (values still text)."""
    out: dict[str, str] = {}
    for item in items or ():
        name, sep, value = item.partition("=")
        if not sep or not name.strip() or not value.strip():
            raise QueryError(f"--at {item!r} is not name=value; write e.g. --at shell_parameter=6.5",
                             field="at", value=item)
        if name.strip() in out:
            raise QueryError(f"--at gives {name.strip()!r} twice; give each axis once", field="at", value=item)
        out[name.strip()] = value.strip()
    return out


def is_log_axis(ds: xr.Dataset, name: str) -> bool:
    """Return whether axis ``name`` was given in log spacing (and is positive, so it can be drawn so)."""
    coord = ds[name]
    if coord.attrs.get("spacing") != "log" or coord.dtype.kind not in "fiu":
        return False
    return bool(np.all(np.asarray(coord.values, dtype=float) > 0))


def to_unit(values: np.ndarray, log: bool) -> np.ndarray:
    """Map axis values to the coordinate in which they are evenly spaced (log10 for log axes)."""
    v = np.asarray(values, dtype=float)
    return np.log10(v) if log else v


def from_unit(values: np.ndarray, log: bool) -> np.ndarray:
    """Inverse of :func:`to_unit`."""
    v = np.asarray(values, dtype=float)
    return np.power(10.0, v) if log else v


def _nearest(ds: xr.Dataset, name: str, text: str) -> AxisCut:
    values = ds[name].values
    if values.dtype.kind not in "fiu":
        names = [str(v) for v in values]
        if text not in names:
            raise QueryError(f"--at {name}={text!r}: no such value; use one of {', '.join(names)}",
                             field=f"at.{name}", value=text, allowed=", ".join(names))
        i = names.index(text)
        return AxisCut(name, text, names[i], i)
    try:
        x = float(text)
    except ValueError:
        raise QueryError(f"--at {name}={text!r} is not a number; axis {name} runs from {_fmt(float(values.min()))} "
                         f"to {_fmt(float(values.max()))}", field=f"at.{name}", value=text) from None
    numbers = np.asarray(values, dtype=float)
    lo, hi = float(numbers.min()), float(numbers.max())
    span = hi - lo
    if not (lo - 0.5 * span - 1e-12 <= x <= hi + 0.5 * span + 1e-12) or not math.isfinite(x):
        raise QueryError(f"--at {name}={text} is far outside the axis ({_fmt(lo)} to {_fmt(hi)}); give a value "
                         "inside it", field=f"at.{name}", value=text)
    log = is_log_axis(ds, name) and x > 0
    distance = np.abs(to_unit(numbers, log) - (math.log10(x) if log else x))
    i = int(np.argmin(distance))
    return AxisCut(name, x, float(numbers[i]), i)


def slice_sweep(ds: xr.Dataset, keep: Sequence[str], at: Mapping[str, str] | None = None) -> SweepSlice:
    """Return the view of ``ds`` with axes ``keep`` and every other axis fixed.

    Raises
    ------
    QueryError
        For an unknown axis, an axis both kept and fixed, or a value not on the axis.
    """
    axes = [str(d) for d in ds[metadata.STATUS_VAR].dims]
    at = dict(at or {})
    for name in [*keep, *at]:
        if name not in axes:
            raise QueryError(f"{name!r} is not an axis of this store; its axes are {', '.join(axes)}",
                             field="axis", value=name, allowed=", ".join(axes))
    if len(set(keep)) != len(keep):
        raise QueryError(f"the axes {', '.join(keep)} repeat; choose different axes", field="axis", value=keep)
    for name in keep:
        if name in at:
            raise QueryError(f"{name!r} is both drawn and fixed by --at; drop --at {name}=...", field="at",
                             value=name)
    cuts: list[AxisCut] = []
    index: dict[str, int] = {}
    for name in axes:
        if name in keep:
            continue
        cut = _nearest(ds, name, at[name]) if name in at else AxisCut(name, None, _first(ds, name), 0)
        if ds.sizes[name] == 1:
            cut = AxisCut(name, cut.asked, cut.value, 0)
        cuts.append(cut)
        index[name] = cut.index
    view = ds.isel(index).transpose(*keep, ...)
    log = tuple(is_log_axis(ds, k) for k in keep)
    return SweepSlice(ds=view, axes=tuple(keep), cuts=tuple(c for c in cuts if ds.sizes[c.name] > 1),
                      log=log, fixed_values={c.name: c.value for c in cuts})


def _first(ds: xr.Dataset, name: str) -> Any:
    v = ds[name].values[0]
    return v.item() if hasattr(v, "item") else v


def points_in_slice(points: Mapping[str, np.ndarray] | None, fixed: Mapping[str, Any]) -> np.ndarray | None:
    """Return the indices of point-list entries lying in the slice (every fixed axis equal), or ``None``."""
    if points is None:
        return None
    n = np.asarray(points[metadata.STATUS_VAR]).shape[0]
    mask = np.ones(n, dtype=bool)
    for name, value in fixed.items():
        column = np.asarray(points[name])
        if isinstance(value, str):
            mask &= column.astype(str) == value
        else:
            mask &= column.astype(float) == float(value)
    return np.flatnonzero(mask)
