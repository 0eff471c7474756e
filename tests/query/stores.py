"""Small stores of the analytic ``winkler_column`` model for the query, plot and CLI tests.

Blocks are computed in this process (no dask cluster to start), which keeps each store
under a few tenths of a second; the engine's own tests cover the cluster path.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

from sweepshell.config.loader import load_plan
from sweepshell.engine.runner import prepare_store
from sweepshell.engine.worker import compute_block
from sweepshell.plan import iter_blocks
from tests.conftest import COLUMN_SWEEP, CONFIGS, write_sweep

#: a column sweep with a few failed and outside-validity points (load_ratio == 0.5 fails; eta > 500 is outside)
#: a three-axis column sweep (one named axis) shared by the boundary and report tests
THREE_AXES = """\
name: column3
model: winkler_column
axes:
  stiffness_ratio: {logspace: [-1, 3, 13]}
  load_ratio: {linspace: [0.5, 40, 11]}
  end: [pinned, weak]
"""

FAULTY_OVERRIDES = ("+settings.fail_at=0.5", "settings.validity_limit=500")


def make_column_store(folder: Path, name: str = "column", overrides: Sequence[str] = (),
                      sweep_text: str = COLUMN_SWEEP) -> Path:
    """Compute a small column sweep into ``folder/<name>.zarr`` and return the store path."""
    folder.mkdir(parents=True, exist_ok=True)
    sweep = write_sweep(folder, sweep_text, name=f"{name}.yaml")
    store = folder / f"{name}.zarr"
    plan = load_plan(str(sweep), [f"store.path={store}", *overrides], config_dir=str(CONFIGS))
    block_shape, _ = prepare_store(plan)
    values = [a.to_array() for a in plan.axes]
    for block in iter_blocks(plan.shape, block_shape):
        compute_block(str(store), plan.model, plan.settings, plan.axis_names,
                      [v[s] for v, s in zip(values, block.slices, strict=True)], plan.fixed, block)
    return store
