"""foundation_strip's compiled residual and Jacobian against their numpy specification."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.linalg import lu_factor

from sweepshell.models.foundation_strip.bordered import (
    _residual,
    build_weights,
    compute_jacobian,
    compute_residual,
    factor_at,
    factor_bordered,
    lu_solve,
)
from sweepshell.models.foundation_strip.elastica import build_strip_grid, build_strip_problem

TWO_PI = 2.0 * np.pi


@pytest.mark.parametrize("cubic", [0.0, -0.3])
def test_compiled_kernels_equal_the_numpy_specification(rng, cubic):
    grid = build_strip_grid(8 * TWO_PI, 128)
    problem = build_strip_problem(grid, imperfection=1e-3 * TWO_PI, width=TWO_PI, cubic=cubic)
    n = grid.n
    X = np.concatenate([problem.phi0 + 0.2 * rng.standard_normal(n), [1.9, 0.03, 0.01]])
    row = build_weights(n) * rng.standard_normal(n + 3)
    r = np.empty(n + 2)
    _residual(problem, X, r)
    # the same floating-point operations in the same order: equal to the last bit
    np.testing.assert_array_equal(r, compute_residual(problem, X))
    spec = factor_bordered(compute_jacobian(problem, X), row)
    fast = factor_at(problem, X, row)
    assert spec is not None and fast is not None
    np.testing.assert_array_equal(fast[0], spec[0])
    np.testing.assert_array_equal(fast[1], spec[1])
    b = rng.standard_normal(n + 3)
    A = np.vstack([compute_jacobian(problem, X), row])
    np.testing.assert_allclose(A @ lu_solve(fast, b), b, atol=1e-9)
    assert np.array_equal(lu_factor(A)[0], fast[0])


def test_factor_at_refuses_non_finite_states():
    grid = build_strip_grid(4 * TWO_PI, 64)
    problem = build_strip_problem(grid, imperfection=1e-3 * TWO_PI, width=TWO_PI, cubic=0.0)
    X = np.concatenate([problem.phi0, [np.nan, 0.0, 0.0]])
    assert factor_at(problem, X, build_weights(grid.n)) is None
