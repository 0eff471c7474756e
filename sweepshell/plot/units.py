"""Readable numbers on figures: engineering prefixes for SI values, short decimals, integer ticks.

The rule, applied the same way to axes, colour bars, legends and titles:

- A quantity whose unit string starts with a plain SI unit that takes prefixes (``m``, ``Pa``,
  ``N``, ``J``, ``W``, ``s``) is shown in that unit with one engineering prefix (a power of
  10³) chosen so that the largest magnitude shown lies in [1, 1000): 4·10⁵ m reads 400 km,
  2·10⁻⁷ m reads 200 nm, 7·10¹⁰ Pa reads 70 GPa. A log axis spanning more than three decades
  keeps the base unit and labels decades as powers of ten instead (a prefix would fit only
  part of it).
- Other units (``1``, ``kg m-3``) are never scaled; negative powers in unit strings are written
  as superscripts (``N m⁻¹``).
- Numbers are written with at most four significant digits (three in legends and titles),
  without trailing zeros, with a true minus sign; whole numbers are written as integers.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:
    from matplotlib.axis import Axis

__all__ = ["choose_prefix", "format_number", "format_quantity", "is_integer_valued", "pretty_units",
           "set_axis_format"]

#: units that take an engineering prefix on their first token
PREFIXABLE = ("m", "Pa", "N", "J", "W", "s")
_PREFIXES = {-15: "f", -12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G", 12: "T"}
_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")
_DIMENSIONLESS = ("", "1", "-", "dimensionless")


def pretty_units(units: str) -> str:
    """Return ``units`` with powers as superscripts (``Pa m-1`` → ``Pa m⁻¹``); ``""`` when dimensionless."""
    units = units.strip()
    if units in _DIMENSIONLESS:
        return ""
    return re.sub(r"(?<=[A-Za-zµ])(-?\d+)", lambda m: m.group(1).translate(_SUPERSCRIPT), units)


def choose_prefix(units: str, values: Iterable[float], *, log: bool = False) -> tuple[float, str]:
    """Return ``(scale, shown_units)``: divide values by ``scale`` and label them in ``shown_units``.

    Only units whose first token is in :data:`PREFIXABLE` are scaled (see the module rule).
    """
    shown = pretty_units(units)
    tokens = units.split()
    finite = np.abs(np.asarray([v for v in values if v is not None], dtype=float))
    finite = finite[np.isfinite(finite) & (finite > 0)]
    if not tokens or tokens[0] not in PREFIXABLE or not finite.size:
        return 1.0, shown
    if log and finite.max() / finite.min() > 1e3:
        return 1.0, shown
    exponent = 3 * math.floor(math.log10(float(finite.max())) / 3 + 1e-9)
    exponent = min(max(exponent, min(_PREFIXES)), max(_PREFIXES))
    head, *rest = shown.split(" ", 1)
    return 10.0 ** exponent, " ".join([_PREFIXES[exponent] + head, *rest])


def format_number(value: float, digits: int = 4) -> str:
    """Return a short decimal: ``0.00187``, ``400``, ``1.5e+06`` → ``1.5×10⁶``, ``−2`` (true minus)."""
    if value is None or not np.isfinite(value):
        return "–"
    value = float(value)
    if value == 0:
        return "0"
    if value == round(value) and abs(value) < 1e6:
        return f"{round(value)}".replace("-", "−")
    text = f"{value:.{digits}g}"
    if "e" in text:
        mantissa, exponent = text.split("e")
        power = str(int(exponent)).translate(_SUPERSCRIPT)
        text = f"10{power}" if mantissa in ("1", "-1") else f"{mantissa}×10{power}"
        if mantissa == "-1":
            text = "-" + text
    return text.replace("-", "−")


def format_quantity(value: Any, units: str, digits: int = 3) -> str:
    """Return ``value`` with its unit, scaled by the prefix rule: ``4e5, "m"`` → ``400 km``."""
    if isinstance(value, str):
        return value
    scale, shown = choose_prefix(units, [float(value)])
    text = format_number(float(value) / scale, digits)
    return f"{text} {shown}" if shown else text


def is_integer_valued(values: Any) -> bool:
    """Whether every finite value is a whole number (and there is at least one)."""
    array = np.asarray(values, dtype=float)
    finite = array[np.isfinite(array)]
    return bool(finite.size) and bool(np.all(finite == np.round(finite))) and float(np.max(np.abs(finite))) < 1e9


def set_axis_format(axis: Axis, units: str, values: Iterable[float], *, log: bool = False,
                    integer: bool = False, digits: int = 4) -> str:
    """Format one axis (or colour-bar axis) by the module rule and return the units shown.

    ``values`` are the data drawn along the axis (they choose the prefix); ``integer`` puts
    ticks on whole numbers only; ``digits`` is the number of significant digits shown.
    """
    from matplotlib.ticker import (
        FuncFormatter,
        LogFormatterSciNotation,
        LogLocator,
        MaxNLocator,
        NullFormatter,
    )

    values = [float(v) for v in values]
    scale, shown = choose_prefix(units, values, log=log)

    def short(value: float, _pos: int | None = None) -> str:
        return format_number(value / scale, digits)

    if log:
        finite = np.abs(np.asarray(values, float))
        finite = finite[np.isfinite(finite) & (finite > 0)]
        decades = math.log10(finite.max() / finite.min()) if finite.size else 0.0
        if decades > 3 and scale == 1.0:
            axis.set_major_locator(LogLocator(base=10, numticks=8))
            axis.set_major_formatter(LogFormatterSciNotation(labelOnlyBase=True))
        elif decades >= 2.5:
            axis.set_major_locator(LogLocator(base=10, numticks=8))
            axis.set_major_formatter(FuncFormatter(short))
        else:  # a few decades or less: label 1-2-3-5 (thinned later if they collide)
            axis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 3.0, 5.0), numticks=12))
            axis.set_major_formatter(FuncFormatter(short))
        axis.set_minor_formatter(NullFormatter())
    else:
        axis.set_major_locator(MaxNLocator(nbins="auto", steps=[1, 2, 2.5, 5, 10], integer=integer))
        axis.set_major_formatter(FuncFormatter(short))
    return shown
