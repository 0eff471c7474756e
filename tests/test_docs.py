"""The worked example of docs/writing-a-model.md keeps the contract and gives Euler's load."""

from __future__ import annotations

import math
import re

import numpy as np

from sweepshell.testing import check_model
from tests.conftest import REPO


def test_writing_a_model_example_keeps_the_contract():
    text = (REPO / "docs" / "writing-a-model.md").read_text()
    code = re.search(r"## A worked example.*?```python\n(.*?)```", text, re.S)
    assert code, "the guide lost its worked example"
    assert 40 <= len(code.group(1).splitlines()) <= 75  # about sixty lines
    namespace: dict = {}
    exec(compile(code.group(1), "writing-a-model.md", "exec"), namespace)  # our own documentation
    model_cls = namespace["EulerStrutModel"]
    check_model(model_cls)
    result = model_cls().solve_batch({"length": np.array([2.0]), "bending_stiffness": np.array([10.0]),
                                      "load": np.array([1.0]), "ends": np.array(["pinned"])})
    # pinned strut: P_cr = pi^2 EI / L^2 (Euler 1744; Timoshenko & Gere 1961, Sec. 2.1)
    assert result.outputs["critical_load"][0] == math.pi**2 * 10.0 / 4.0
