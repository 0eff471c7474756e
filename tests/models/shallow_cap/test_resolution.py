"""The automatic radial grid of ``shallow_cap`` against much finer grids (resolution, not physics).

Common practice, no source: a result counts as resolved when a grid about twice as fine changes
it by less than the stated tolerance. The automatic node counts (``choose_grids``) were fitted
to the measured need for 3·10⁻⁷ relative accuracy over λ = 3.5 … 30 (sweepshell/models/shallow_cap/theory.md).
"""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell.models import make_model
from sweepshell.models.shallow_cap.grids import choose_grids
from tests.conftest import cap_inputs

AXISYMMETRIC = {"asymmetric_modes": 0, "check_bistability": False, "max_pressure": 3.0}


def critical(settings, lam, **over):  # type: ignore[no-untyped-def]
    out = make_model("shallow_cap", settings).solve_batch(cap_inputs(lam, **over)).outputs
    return out["critical_load"], out["critical_wavenumber"]


def test_automatic_grids_grow_with_lambda_and_stretch_only_where_needed():
    s = make_model("shallow_cap", {}).settings
    lam = np.array([4.0, 20.0, 20.0, 20.0, 20.0])
    apex = np.array([False, False, False, True, False])
    eigen = np.array([False, False, False, False, True])
    amp = np.array([0.0, 0.0, 1.0, 0.0, 0.0])
    nodes, beta = choose_grids(s, lam, apex, eigen, amp, np.full(5, 2.0))
    assert nodes[0] < nodes[1] and nodes.min() >= 16 and np.all(nodes % 2 == 0)
    np.testing.assert_array_equal(beta, [0.0, 0.0, 0.5, 0.85, 0.0])
    assert nodes[4] == 80  # sharp-edged mismatch points (the default): 44 + 1.8λ
    fixed, _ = choose_grids({**s, "nodes": 40}, lam, apex, eigen, amp, np.full(5, 2.0))
    np.testing.assert_array_equal(fixed, [40, 40, 40, 40, 40])


def test_perfect_caps_are_resolved_to_one_part_per_million():
    lam = np.array([4.0, 7.75, 12.75, 19.25, 27.0])  # λ where the measured need peaked
    got, n_got = critical(AXISYMMETRIC, lam)
    want, n_want = critical({**AXISYMMETRIC, "nodes": 72}, lam)
    np.testing.assert_array_equal(n_got, n_want)
    np.testing.assert_allclose(got, want, rtol=1e-6)
    # with the asymmetric scan (the critical state is mostly a bifurcation above λ ≈ 5.5)
    lam = np.array([9.5, 16.5, 22.0])
    scan = {"check_bistability": False, "max_pressure": 3.0}
    got, n_got = critical(scan, lam)
    want, n_want = critical({**scan, "nodes": 64}, lam)
    np.testing.assert_array_equal(n_got, n_want)
    np.testing.assert_allclose(got, want, rtol=1e-6)


def test_dimpled_caps_are_resolved_on_the_stretched_grid():
    lam = np.array([12.0, 20.0])
    over = {"dimple_amplitude": np.array([0.5, 1.0]), "dimple_width": np.array([2.0, 1.0])}
    got, _ = critical(AXISYMMETRIC, lam, **over)
    want, _ = critical({**AXISYMMETRIC, "nodes": 80}, lam, **over)
    np.testing.assert_allclose(got, want, rtol=1e-6)
    # the plain Chebyshev grid of the same size is far less accurate here (its nodes are coarsest at the axis)
    plain, _ = critical({**AXISYMMETRIC, "nodes": 44, "dimple_grid_stretch": 0.0}, lam[1:], **{
        k: v[1:] for k, v in over.items()})
    assert abs(plain[0] / want[1] - 1) > 1e-4


def test_apex_force_maximum_converges_algebraically_to_a_few_parts_in_ten_thousand():
    # the nonlinear state under a point force keeps x³ log² x-type terms at the apex after the
    # x log x singularity is removed, so convergence is algebraic: the force maximum is resolved
    # to ~3·10⁻⁴ (measured against 84 nodes, whose own error is ~3·10⁻⁵)
    lam = np.array([10.0, 20.0])
    got, _ = critical(AXISYMMETRIC, lam, load="apex_force")
    want, _ = critical({**AXISYMMETRIC, "nodes": 84}, lam, load="apex_force")
    np.testing.assert_allclose(got, want, rtol=5e-4)


@pytest.mark.slow
def test_random_mixed_caps_are_resolved_with_the_scan(rng):
    # edges, in-plane edges, Poisson's ratios, dimples and λ drawn at random: the automatic grid
    # against 80 nodes (measured: 60 such points agreed to 1.7·10⁻⁷, with the same wave numbers)
    n = 16
    lam = rng.uniform(3.5, 25.0, n)
    over = {"edge": rng.choice(["clamped", "pinned"], n).astype(str),
            "edge_inplane": rng.choice(["immovable", "sliding"], n).astype(str),
            "dimple_amplitude": np.where(rng.random(n) < 0.5, 0.0, rng.uniform(0.05, 1.0, n)),
            "dimple_width": rng.uniform(1.0, 3.0, n), "poisson_ratio": rng.uniform(0.2, 0.45, n)}
    scan = {"check_bistability": False, "max_pressure": 3.0}
    got, n_got = critical(scan, lam, **over)
    want, n_want = critical({**scan, "nodes": 80}, lam, **over)
    np.testing.assert_array_equal(n_got, n_want)
    np.testing.assert_allclose(got, want, rtol=1e-6)
