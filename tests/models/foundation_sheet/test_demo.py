"""The ``coated_patch_wrinkle_map`` demo sweep keeps its promise: a map with several 2-D patterns.

Runs a handful of the sweep's own points through the model (the full 64-point sweep takes
about a minute on two cores); the labels follow from the physics tests (common practice,
no source): flat below onset, stripes for strongly unequal compression, checkerboard for
equibiaxial compression just above onset, zigzag or meandering patterns well above it.
"""

from __future__ import annotations

import numpy as np
import pytest
import yaml

from sweepshell.config.loader import build_plan
from sweepshell.models import Status, make_model
from tests.conftest import CONFIGS

SWEEP = CONFIGS / "sweep" / "coated_patch_wrinkle_map.yaml"


@pytest.mark.slow
def test_demo_points_show_flat_stripes_checkerboard_and_a_disordered_pattern() -> None:
    cfg = yaml.safe_load(SWEEP.read_text())
    plan = build_plan(cfg, source=str(SWEEP))
    assert plan.model == "foundation_sheet" and len(plan.axes) == 2
    model = make_model("foundation_sheet", cfg["settings"])
    points = {"flat": (0.0015, 0.0015), "stripes": (0.0099, 0.0015), "checkerboard": (0.00375, 0.00375),
              "high": (0.0099, 0.0099)}
    n = len(points)
    inputs = {p.name: np.full(n, cfg["fixed"].get(p.name, p.default), dtype=object if p.choices else float)
              for p in model.parameters}
    inputs["strain_x"] = np.array([xy[0] for xy in points.values()])
    inputs["strain_y"] = np.array([xy[1] for xy in points.values()])
    for name in ("strain_x", "strain_y"):
        assert set(inputs[name]) <= set(cfg["axes"][name])
    res = model.solve_batch(inputs)
    names = [model.regimes[r] for r in res.regime]
    assert names[:3] == ["flat", "stripes", "checkerboard"]
    assert names[3] in ("herringbone", "labyrinth")
    assert res.status[0] == Status.no_instability and np.all(res.status[1:] == Status.ok)
