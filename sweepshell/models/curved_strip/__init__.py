"""``curved_strip``: a transversely curved strip (tape spring) under longitudinal bending.

The model class lives in :mod:`.model`, the batched section numerics in :mod:`.section`, the
moment–curvature path in :mod:`.moment_path` and the cantilever load case in :mod:`.cantilever`;
``theory.md`` holds the derivation, the validity range and the validation record.
"""

from __future__ import annotations

from sweepshell.models.curved_strip.model import CurvedStripModel

__all__ = ["CurvedStripModel"]
