"""Running a sweep given by name, file or plan: load it here, then hand the plan to the engine."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from sweepshell.engine.observers import RunObserver
from sweepshell.engine.runner import RunSummary
from sweepshell.engine.runner import run_sweep as run_plan_and_refine
from sweepshell.plan import SweepPlan

__all__ = ["run_sweep"]


def run_sweep(sweep: str | SweepPlan, overrides: Sequence[str] = (), *, observer: RunObserver | None = None,
              config_dir: str | None = None, client: Any = None) -> RunSummary:
    """Run a sweep by name, path or plan; running it again resumes it.

    Parameters
    ----------
    sweep
        A sweep name in ``configs/sweep/``, a path to a sweep YAML file, or a :class:`SweepPlan`.
    overrides
        hydra-style overrides (``fixed.poisson_ratio=0.25``, ``axes.x=range(0,1,0.1)``).
    observer
        Progress observer; silent by default.
    config_dir
        The folder holding ``config.yaml`` (default: ``./configs``, else the demo configs packaged with
        sweepshell).
    client
        An existing :class:`distributed.Client` to run on (left open); the sweep's executor otherwise. Its
        workers must reach the store path.
    """
    if isinstance(sweep, SweepPlan):
        plan = sweep
    else:
        from sweepshell.config.loader import load_plan

        plan = load_plan(sweep, overrides, config_dir=config_dir)
    return run_plan_and_refine(plan, observer=observer, client=client)
