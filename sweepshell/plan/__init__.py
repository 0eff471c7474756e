"""The plan layer: a validated, frozen sweep (axes, fixed parameters, settings) and its blocks.

Pure data and arithmetic on it (numpy only): every layer above (store, query, engine, config)
takes plans and blocks from here, and this package imports nothing else of sweepshell.
"""

from sweepshell.plan.blocks import Block, choose_block_shape, iter_blocks
from sweepshell.plan.sweep import IN_PROCESS_SECONDS, Axis, ExecutorSpec, SweepPlan

__all__ = ["IN_PROCESS_SECONDS", "Axis", "Block", "ExecutorSpec", "SweepPlan", "choose_block_shape", "iter_blocks"]
