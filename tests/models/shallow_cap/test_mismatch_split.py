"""Sharp-edged mismatch strain on the two-domain grid split at the region's edge (``mismatch_grid`` split).

e = ε*/ε_cl (ε_cl = 2h/(R c)), negative = shrinkage; λ the shell parameter; ρ the region's
radius over a. Each side of ρ has its own Chebyshev polynomial
(:mod:`sweepshell.numerics.radial_two_domain`), so the critical load converges geometrically
in the node count although the hoop prestress jumps at ρ. Cases as in
``test_mismatch_sharp.py``: a shrinking disc (λ = 8, ρ = 0.5, clamped, immovable; n = 6) and a
swelling annulus (λ = 6, ρ = 0.5; n = 12).
"""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell.models import make_model
from sweepshell.models.shallow_cap import modes, solver
from sweepshell.models.shallow_cap.grids import choose_grid_splits, get_split_counts
from sweepshell.models.shallow_cap.modes import count_unstable_modes
from sweepshell.models.shallow_cap.problem import CapInputs, build_batch_problem, build_problem
from tests.conftest import cap_inputs
from tests.models.shallow_cap.test_mismatch_reference import NU, disc_inclusion_stress, linear_membrane_stress

FAST = {"check_bistability": False, "asymmetric_modes": 14, "path_samples": 8, "mismatch_grid": "split"}
DISC = {"lam": 8.0, "mismatch_strain": -6.0}
ANNULUS = {"lam": 6.0, "mismatch_strain": 8.0, "mismatch_region": "annulus"}


def critical(case, **settings):
    """Return the critical load, wave number and status of a case on the two-domain grid."""
    case = dict(case)
    model = make_model("shallow_cap", {**FAST, **settings})
    res = model.solve_batch(cap_inputs([case.pop("lam")], load="mismatch", **case))
    return res.outputs["critical_load"][0], res.outputs["critical_wavenumber"][0], res.status[0]


@pytest.mark.parametrize(("case", "limit", "errors"), [
    # measured relative errors on 20, 28, 36 nodes: 7.4e-4, 1.8e-5, 1.2e-7 (disc); 1.5e-2, 9.4e-5, 7.3e-7 (annulus)
    (DISC, -3.8685547, (2e-3, 5e-5, 5e-7)),
    (ANNULUS, 7.0862616, (5e-2, 3e-4, 3e-6)),
])
def test_critical_load_converges_geometrically(case, limit, errors):
    # common practice, no source: every 8 nodes the error falls by a factor of at least 30 and the
    # factor does not shrink, where an algebraic order k would give (28/20)^k, then the smaller (36/28)^k
    ref, n_ref, _ = critical(case, nodes=56)
    got = [critical(case, nodes=m) for m in (20, 28, 36)]
    assert all(n == n_ref for _, n, _ in got)
    err = np.array([abs(v / ref - 1.0) for v, _, _ in got])
    assert np.all(err < errors)
    assert err[0] / err[1] > 30 and err[1] / err[2] > 30
    assert err[1] / err[2] > 0.5 * err[0] / err[1]
    # the limit agrees with the clustered grid's extrapolation (test_mismatch_sharp.py: −3.86855, 7.086263)
    assert ref == pytest.approx(limit, rel=1e-7)


def test_sliding_n1_stress_operator_is_regular():
    # common practice, no source: with one edge condition (N_r = N_rθ = 0 both give F' − F) the n = 1
    # stress block is singular if ρ's inner neighbour holds an interface row (the gauge Φ = x solves
    # the outer side); with that row moved to row 1 its smallest singular value is of the single grid's order
    size, outer = get_split_counts(8.0, 0.5, 40)
    reduction = modes._build_stress_reduction(size, 1, False, 0.0, 0.0, 0.5, outer)
    assert np.all(np.isfinite(reduction))
    ops = modes.build_mode_operators(size, 1, 0.0, 0.0, 0.5, outer)
    s = ops.stress.bilaplacian.copy()
    s[0], s[1] = modes._stress_edge_rows(ops, 0.3, False)
    modes.sliding_n1_stress(s, ops.stress.bilaplacian, ops.stress.inner_rows, outer)
    s /= np.abs(s).max(axis=1)[:, None]
    assert np.linalg.svd(s, compute_uv=False)[-1] > 1e-9


@pytest.mark.slow
@pytest.mark.parametrize(("case", "want", "n_want"), [
    # clustered grid: n = 6 at −3.768582, −3.768564 on 80, 128 nodes (an interface row at ρ's inner
    # neighbour, instead of row 1, gave n = 1 at −0.16 for this sliding edge)
    ({"lam": 9.1671, "mismatch_radius": 0.4770, "edge_inplane": "sliding", "mismatch_strain": -16.66}, -3.768564, 6),
    # clustered grid: n = 17 at −6.401144, −6.400083 on 80, 128 nodes (40 split nodes gave a spurious n = 2)
    ({"lam": 29.0553, "mismatch_radius": 0.3529, "edge": "pinned", "poisson_ratio": 0.4, "mismatch_strain": -6.70},
     -6.400083, 17),
])
def test_no_spurious_low_wave_numbers_with_automatic_nodes(case, want, n_want):
    # common practice, no source: against the clustered grid on 128 nodes (benchmarks/check_sharp_mismatch.py
    # caps); measured on the automatic split grid −3.7685665 and −6.4000024 (96 split nodes: −3.7685666, −6.4000007)
    value, n, status = critical(case, asymmetric_modes=30)
    assert status == 1 and n == n_want
    assert value == pytest.approx(want, rel=3e-5)


def test_node_rule_and_grid_choice():
    # measured need for about 1e-5 relative (theory.md): p = 20 + 1.4 λ (1 − ρ), q = 8 + 1.5 λ ρ
    assert get_split_counts(8.0, 0.5) == (26 + 14, 26)
    assert get_split_counts(30.0, 0.9) == (25 + 49, 25)
    size, outer = get_split_counts(8.0, 0.5, 40)
    assert size == 40 and outer == round(40 * 25.6 / 39.6)
    settings = {"mismatch_step_width": 0.0, "nodes": 0, "mismatch_grid": "split"}
    eigen = np.array([True, True, False])
    nodes, split, outer = choose_grid_splits(settings, np.array([8.0, 8.0, 8.0]), eigen, np.array([0.5, 1.0, 0.5]),
                                             np.array([60, 60, 22]))
    np.testing.assert_array_equal(nodes, [40, 60, 22])
    np.testing.assert_array_equal(split, [0.5, 0.0, 0.0])
    np.testing.assert_array_equal(outer, [26, 0, 0])
    clustered = {**settings, "mismatch_grid": "clustered"}
    np.testing.assert_array_equal(choose_grid_splits(clustered, np.full(3, 8.0), eigen, np.full(3, 0.5),
                                                     np.full(3, 60))[1], 0.0)
    with pytest.raises(ValueError, match="mismatch_grid"):
        make_model("shallow_cap", {"mismatch_grid": "fine"})


@pytest.mark.parametrize("immovable", [False, True])
@pytest.mark.parametrize("annulus", [False, True])
def test_flat_plate_with_a_sharp_disc_is_the_lame_inclusion(immovable, annulus):
    # Lamé disc inclusion, re-derived (Timoshenko & Goodier 1951, thermal stresses in a thin
    # disc; see tests/models/shallow_cap/test_mismatch_reference.py): N_r at every node, N_θ (which
    # jumps at ρ) at every node but ρ, from each side's own polynomial; λ = 0.01
    rho = 0.6
    one = np.ones(1, dtype=bool)
    size, outer = get_split_counts(0.01, rho, 30)
    pb = build_problem(np.array([0.01]), np.array([NU]), one, immovable * one, ~one, np.zeros(1),
                       np.full(1, 2.0), size, mismatch=one, mismatch_strain=np.ones(1),
                       mismatch_radius=np.array([rho]), annulus=annulus * one, step_width=0.0, split=rho, outer=outer)
    x = pb.grid.x
    assert x[outer] == rho
    n_r, n_t = linear_membrane_stress(pb)
    want_r, want_t = disc_inclusion_stress(x, rho, immovable)
    if annulus:
        whole = -1.0 / (1 - NU) if immovable else 0.0
        want_r, want_t = whole - want_r, whole - want_t
    away = x != rho
    np.testing.assert_allclose(n_r, want_r, atol=1e-9)
    np.testing.assert_allclose(n_t[away], want_t[away], atol=1e-9)


def test_unstable_mode_counts_agree_with_the_clustered_grid():
    # common practice, no source: the eigenvalue counts (the bistability check) with the interface rows
    # eliminated, against the clustered grid at nearly the same load (λ = 8 disc, sliding edge; measured
    # n = 4 … 8 unstable at e ≈ −4.19, n = 3 … 12 at e ≈ −5.46 on both)
    one = np.ones(1, dtype=bool)
    caps = CapInputs(np.array([8.0]), np.array([NU]), one, ~one, ~one, np.zeros(1), np.full(1, 2.0), mismatch=one,
                     mismatch_strain=np.array([-6.0]), mismatch_radius=np.array([0.5]), annulus=~one)
    counts = []
    for grid in ({"nodes": 40, "grid_split": 0.5, "grid_outer": 26}, {"nodes": 60, "grid_centre": 0.5}):
        settings = {**make_model("shallow_cap", FAST).settings, "grid_stretch": 0.0, **grid}
        pb = build_batch_problem(caps, settings)
        hist = solver._trace_paths(pb, caps, settings).hist
        e = hist.z[0, :hist.count[0], -1] * pb.force_scale[0]
        rows = [int(np.argmin(np.abs(e - target))) for target in (-2.0, -4.2, -5.5)]
        counts.append(count_unstable_modes(pb, hist.z[0, rows], np.zeros(3, dtype=int), np.arange(1, 13)))
    np.testing.assert_array_equal(counts[0], counts[1])
    assert counts[0][0].sum() == 0 and counts[0][1].tolist() == [0, 0, 0, 1, 1, 1, 1, 1, 0, 0, 0, 0]
