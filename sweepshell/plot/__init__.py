"""Figures from stores: regime maps, line plots across a sweep, load paths (matplotlib, Agg)."""

from __future__ import annotations

from sweepshell.plot.accessor import SweepAccessor
from sweepshell.plot.regime_map import MapResult, draw_output_lines, draw_regime_map

__all__ = ["MapResult", "SweepAccessor", "draw_output_lines", "draw_regime_map"]
