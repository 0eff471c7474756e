"""The package version and the caution shown wherever critical loads are shown.

Bottom layer (beside :mod:`sweepshell.errors`): every layer may import it.
"""

from __future__ import annotations

__all__ = ["CAUTION", "__version__"]

__version__ = "0.1.0"

#: the caution printed wherever critical loads are shown
CAUTION = (
    "Caution: sweepshell results come from reduced-order elastic models of perfect or "
    "idealised structures. Real shells are highly imperfection-sensitive: measured buckling "
    "loads can fall far below classical values, which is why design codes apply knock-down "
    "factors. Design must follow the applicable codes and standards and licensed engineering "
    "review; do not use these numbers alone to size a structure."
)
