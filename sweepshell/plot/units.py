"""Readable numbers in figures: engineering prefixes for SI base units, integers as integers.

The rule: a value in a unit that takes a prefix (a single SI symbol such as ``m``, ``Pa``,
``N``) is written with the power of 1000 that puts its mantissa in [1, 1000), e.g.
0.0254 m → ``25.4 mm``, 2e11 Pa → ``200 GPa``; compound units (``N m``, ``kg m-3``) and
dimensionless values keep their unit and four significant digits; integral values are
written without a decimal point.
"""

from __future__ import annotations

import math
from typing import Any

__all__ = ["PREFIXED_UNITS", "engineering_scale", "format_number", "format_quantity"]

#: units written with an engineering prefix (single symbols only: "mN m" would read ambiguously)
PREFIXED_UNITS = frozenset({"m", "Pa", "N", "J", "W", "s", "g", "Hz"})
_PREFIXES = {-12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G", 12: "T"}
_DIMENSIONLESS = ("", "1", "-", "dimensionless")


def format_number(value: float, digits: int = 4) -> str:
    """Return ``value`` with ``digits`` significant digits; integral values without a decimal point."""
    v = float(value)
    if math.isnan(v):
        return "NaN"
    if math.isinf(v):
        return "∞" if v > 0 else "−∞"
    if v == int(v) and abs(v) < 10**digits:
        return str(int(v)).replace("-", "−")
    text = f"{v:.{digits}g}"
    return text.replace("e+0", "e").replace("e-0", "e-").replace("-", "−")


def engineering_scale(magnitude: float, units: str) -> tuple[float, str]:
    """Return ``(factor, unit)`` so that ``magnitude / factor`` lies in [1, 1000) in ``unit``.

    Units that take no prefix come back unchanged with factor 1.
    """
    if units not in PREFIXED_UNITS or not math.isfinite(magnitude) or magnitude <= 0:
        return 1.0, units
    power = 3 * math.floor(math.log10(magnitude) / 3 + 1e-9)
    power = max(min(power, 12), -12)
    return 10.0**power, _PREFIXES[power] + units


def format_quantity(value: Any, units: str = "") -> str:
    """Return e.g. ``25.4 mm``, ``200 GPa``, ``0.3``, ``5``, ``∞ m`` or a category name unchanged."""
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
    text = format_number(v)
    return f"{text} {unit}" if unit else text
