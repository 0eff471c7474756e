"""``sweepshell.testing.check_model`` catches each way a model can break the contract, with a clear message."""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell.models.base import BatchResult
from sweepshell.testing import ModelContractError, WinklerColumnModel, check_model


def test_a_good_model_passes():
    check_model(WinklerColumnModel)
    check_model(WinklerColumnModel, {"path_samples": 3})


class _LeaksValues(WinklerColumnModel):
    def solve_batch(self, inputs):
        r = super().solve_batch(inputs)
        out = {k: np.nan_to_num(v, nan=1.0) for k, v in r.outputs.items()}
        return BatchResult(outputs=out, status=r.status, regime=r.regime)


class _DependsOnBatch(WinklerColumnModel):
    def solve_batch(self, inputs):
        r = super().solve_batch(inputs)
        out = dict(r.outputs)
        out["critical_load"] = out["critical_load"] + 1e-3 * len(r.status)
        return BatchResult(outputs=out, status=r.status, regime=r.regime)


class _NotDeterministic(WinklerColumnModel):
    calls = 0

    def solve_batch(self, inputs):
        r = super().solve_batch(inputs)
        type(self).calls += 1
        out = dict(r.outputs)
        out["margin"] = out["margin"] * (1 + 1e-6 * type(self).calls)
        return BatchResult(outputs=out, status=r.status, regime=r.regime)


class _WrongDtype(WinklerColumnModel):
    def solve_batch(self, inputs):
        r = super().solve_batch(inputs)
        return BatchResult(outputs=r.outputs, status=r.status.astype(np.int64), regime=r.regime)


class _Raises(WinklerColumnModel):
    def solve_batch(self, inputs):
        raise ZeroDivisionError("boom")


class _OutOfBounds(WinklerColumnModel):
    @classmethod
    def sample_inputs(cls):
        inputs = super().sample_inputs()
        inputs["stiffness_ratio"] = inputs["stiffness_ratio"] - 5.0
        return inputs


class _RegimeAtFailure(WinklerColumnModel):
    def solve_batch(self, inputs):
        r = super().solve_batch(inputs)
        return BatchResult(outputs=r.outputs, status=r.status, regime=np.zeros_like(r.regime))


@pytest.mark.parametrize(("broken", "says"), [
    (_LeaksValues, "has values at point"),
    (_DependsOnBatch, "batch-invariant"),
    (_NotDeterministic, "deterministic"),
    (_WrongDtype, "expected uint8"),
    (_Raises, "solve_batch raised ZeroDivisionError"),
    (_OutOfBounds, "outside"),
    (_RegimeAtFailure, "regime is -1 exactly where"),
])
def test_each_broken_rule_is_named(broken, says):
    with pytest.raises(ModelContractError, match=says) as info:
        check_model(broken)
    assert str(info.value).startswith(f"check_model({broken.__name__}): ")


def test_not_a_model_class():
    with pytest.raises(ModelContractError, match=r"subclass of sweepshell\.models\.SweepModel"):
        check_model(dict)  # type: ignore[arg-type]
