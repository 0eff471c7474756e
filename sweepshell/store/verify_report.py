"""What ``sweepshell verify`` found: one problem per inconsistency, and the report over the whole store.

The checks live in :mod:`sweepshell.store.verify_checks`, the walk over the store and the
repair in :mod:`sweepshell.store.verify`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

__all__ = ["VerifyProblem", "VerifyReport"]

_MAX_LISTED = 12


@dataclass(frozen=True)
class VerifyProblem:
    """One inconsistency.

    Attributes
    ----------
    kind
        ``metadata``, ``attribute``, ``layout``, ``chunk`` (does not decode) or ``ledger``
        (values disagree with the status).
    message
        One line saying what is wrong and where.
    variable
        The variable concerned, if any.
    block
        Index of the block concerned, if any.
    points
        Number of points concerned (0 when not about points).
    recomputed
        Whether the next run recomputes the block anyway (its ledger reads as pending).
    """

    kind: str
    message: str
    variable: str | None = None
    block: tuple[int, ...] | None = None
    points: int = 0
    recomputed: bool = False

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "message": self.message, "variable": self.variable,
                "block": list(self.block) if self.block is not None else None, "points": self.points,
                "recomputed": self.recomputed}


@dataclass(frozen=True)
class VerifyReport:
    """The result of :func:`verify_store`.

    Attributes
    ----------
    path
        The store checked.
    total
        Grid points (0 if the layout could not be read).
    counts
        Status name → points, as decoded (unreadable ledger chunks count as pending).
    block_shape
        The store's block (chunk) shape.
    blocks
        Number of blocks.
    recompute_blocks
        Blocks the next run recomputes (holding a pending point or an unreadable ledger chunk).
    recompute_points
        Points in those blocks.
    problems
        Every inconsistency found; empty when the store is consistent.
    repaired_blocks
        Blocks set back to pending by ``repair=True``.
    repaired_metadata
        What ``repair=True`` rebuilt of the metadata, one line each.
    """

    path: str
    total: int = 0
    counts: dict[str, int] = field(default_factory=dict)
    block_shape: tuple[int, ...] = ()
    blocks: int = 0
    recompute_blocks: tuple[tuple[int, ...], ...] = ()
    recompute_points: int = 0
    problems: tuple[VerifyProblem, ...] = ()
    repaired_blocks: tuple[tuple[int, ...], ...] = ()
    repaired_metadata: tuple[str, ...] = ()

    @property
    def consistent(self) -> bool:
        return not self.problems

    def to_dict(self) -> dict[str, Any]:
        return {"path": self.path, "consistent": self.consistent, "total": self.total, "counts": self.counts,
                "block_shape": list(self.block_shape), "blocks": self.blocks,
                "recompute": {"blocks": [list(b) for b in self.recompute_blocks], "points": self.recompute_points},
                "problems": [p.to_dict() for p in self.problems],
                "repaired_blocks": [list(b) for b in self.repaired_blocks],
                "repaired_metadata": list(self.repaired_metadata)}

    def to_lines(self) -> list[str]:
        """Return the human-readable report printed by ``sweepshell verify``."""
        counts = ", ".join(f"{v} {k}" for k, v in self.counts.items() if v)
        head = "consistent" if self.consistent else f"{len(self.problems)} problems"
        lines = [f"store {self.path}: {head}; {self.total} points ({counts or 'none'}) in {self.blocks} blocks"]
        for p in self.problems[:_MAX_LISTED]:
            lines.append(f"  {p.kind}: {p.message}")
        if len(self.problems) > _MAX_LISTED:
            lines.append(f"  ... and {len(self.problems) - _MAX_LISTED} more (see --json)")
        if self.recompute_blocks:
            shown = ", ".join(str(list(b)) for b in self.recompute_blocks[:6])
            more = " ..." if len(self.recompute_blocks) > 6 else ""
            lines.append(f"  a run would recompute {len(self.recompute_blocks)} blocks ({self.recompute_points} "
                         f"points): {shown}{more}")
        else:
            lines.append("  a run would recompute nothing")
        for change in self.repaired_metadata:
            lines.append(f"  repaired: {change}")
        stuck = [p for p in self.problems if p.block is not None and not p.recomputed]
        if stuck and not self.repaired_blocks:
            lines.append("  blocks with final status but bad values are not recomputed by a run; "
                         f"`sweepshell verify --repair {self.path}` sets them back to pending")
        if any(p.kind == "metadata" for p in self.problems) and not self.repaired_metadata:
            lines.append(f"  damaged metadata: `sweepshell verify --repair {self.path}` rebuilds what the arrays "
                         "allow")
        if self.repaired_blocks:
            lines.append(f"  repaired: {len(self.repaired_blocks)} blocks set back to pending; run the sweep again")
        return lines
