"""The division of a sweep grid into chunk-aligned blocks.

Blocks are rectangular sets of points aligned with the store's chunks: the unit of work, of
writing and of resuming.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Iterator
from dataclasses import dataclass

__all__ = ["Block", "choose_block_shape", "iter_blocks"]


@dataclass(frozen=True)
class Block:
    """A rectangular set of points: one slice per axis, aligned with the store chunks."""

    index: tuple[int, ...]
    slices: tuple[slice, ...]

    @property
    def shape(self) -> tuple[int, ...]:
        return tuple(s.stop - s.start for s in self.slices)

    @property
    def n_points(self) -> int:
        return math.prod(self.shape)


def choose_block_shape(shape: tuple[int, ...], target_points: int) -> tuple[int, ...]:
    """Return a chunk/block shape of about ``target_points`` points for a grid ``shape``.

    The last axes are taken whole first (they are contiguous in memory and on disk), so a
    block is a slab of the grid.
    """
    target = max(1, int(target_points))
    block = [1] * len(shape)
    remaining = target
    for i in range(len(shape) - 1, -1, -1):
        take = min(shape[i], max(1, remaining))
        block[i] = take
        remaining = remaining // take
        if remaining <= 1:
            break
    return tuple(block)


def iter_blocks(shape: tuple[int, ...], block_shape: tuple[int, ...]) -> Iterator[Block]:
    """Yield every block of a grid in C order."""
    counts = [math.ceil(n / b) for n, b in zip(shape, block_shape, strict=True)]
    for index in itertools.product(*(range(c) for c in counts)):
        slices = tuple(slice(i * b, min((i + 1) * b, n))
                       for i, b, n in zip(index, block_shape, shape, strict=True))
        yield Block(index=tuple(index), slices=slices)
