"""The ``shallow_cap`` mismatch strain with a sharp-edged region (``mismatch_step_width`` 0, the default).

e = ε*/ε_cl (ε_cl = 2h/(R c)), negative = shrinkage; λ the shell parameter; ρ the region's
radius over a. These tests solve the sharp edge on nodes clustered around ±ρ with a node on ρ
(``mismatch_grid`` clustered, :mod:`sweepshell.numerics.radial_chebyshev`); the two-domain
grid split at ρ (``mismatch_grid`` split) is tested in ``test_mismatch_split.py``. Two cases: a
shrinking central disc (λ = 8, ρ = 0.5, clamped, immovable; wrinkles in n = 6 around the disc) and
a swelling annulus (λ = 6, ρ = 0.5; n = 12).
"""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell.models import make_model
from sweepshell.models.shallow_cap.grids import choose_grid_centres, choose_grids
from sweepshell.models.shallow_cap.problem import build_problem
from sweepshell.models.shallow_cap.solver import CapInputs, solve_caps
from tests.conftest import cap_inputs
from tests.models.shallow_cap.test_mismatch_reference import NU, disc_inclusion_stress, linear_membrane_stress

FAST = {"check_bistability": False, "asymmetric_modes": 8, "path_samples": 8, "mismatch_grid": "clustered"}
DISC = {"lam": 8.0, "mismatch_strain": -6.0}
ANNULUS = {"lam": 6.0, "mismatch_strain": 8.0, "mismatch_region": "annulus"}


def critical(case, **settings):
    """Return the critical load and wave number of a case (modes up to 14) with these settings."""
    case = dict(case)
    model = make_model("shallow_cap", {**FAST, "asymmetric_modes": 14, **settings})
    res = model.solve_batch(cap_inputs([case.pop("lam")], load="mismatch", **case))
    return res.outputs["critical_load"][0], res.outputs["critical_wavenumber"][0]


def observed_order(nodes, values, reference):
    err = np.abs(np.asarray(values) / reference - 1.0)
    return -np.polyfit(np.log(nodes), np.log(err), 1)[0], err


def test_sharp_disc_converges_at_high_order_on_the_clustered_grid():
    # common practice, no source: observed order of the critical load against 128 nodes.
    # Measured: −3.870733, −3.868878, −3.868611 on 34, 48, 64 nodes, −3.868553 on 128 (order ≈ 5.7)
    nodes = [34, 48, 64]
    ref, n_ref = critical(DISC, nodes=128)
    got = [critical(DISC, nodes=m) for m in nodes]
    assert n_ref == 6 and all(n == 6 for _, n in got)
    order, err = observed_order(nodes, [v for v, _ in got], ref)
    assert order > 4.0
    assert err[1] < 1.5e-4 and err[2] < 3e-5
    assert ref == pytest.approx(-3.86855, rel=2e-5)


def test_plain_nodes_resolve_the_sharp_edge_only_at_low_order():
    # common practice, no source: on plain Chebyshev nodes (no node on ρ, jumps sampled one-sided)
    # the same disc is off by ≈ 2 % on 48 and 64 nodes (−3.937, −3.802); why the clustered grid exists
    model = make_model("shallow_cap", {**FAST, "asymmetric_modes": 8})
    one = np.ones(1, dtype=bool)
    for m, want in ((48, -3.9369), (64, -3.8016)):
        caps = CapInputs(np.array([8.0]), np.array([NU]), one, one, ~one, np.zeros(1), np.full(1, 2.0),
                         mismatch=one, mismatch_strain=np.array([-6.0]), mismatch_radius=np.array([0.5]),
                         annulus=~one)
        sol = solve_caps(caps, settings={**model.settings, "nodes": m, "grid_stretch": 0.0, "grid_centre": 0.0})
        assert sol.critical_load[0] == pytest.approx(want, abs=1e-3)
        assert abs(sol.critical_load[0] / -3.86855 - 1) > 1e-2


def test_sharp_annulus_converges_at_high_order_on_the_clustered_grid():
    # common practice, no source: observed order against 96 nodes. Measured: 7.083683, 7.086669,
    # 7.086306 on 24, 34, 48 nodes, 7.086263 on 96 (order ≈ 5)
    nodes = [24, 34, 48]
    ref, n_ref = critical(ANNULUS, nodes=96)
    got = [critical(ANNULUS, nodes=m) for m in nodes]
    assert n_ref == 12 and all(n == 12 for _, n in got)
    order, err = observed_order(nodes, [v for v, _ in got], ref)
    assert order > 4.0
    assert err[1] < 1e-4 and err[2] < 1e-5


@pytest.mark.parametrize(("case", "automatic_nodes"), [(DISC, 60), (ANNULUS, 56)])
def test_sharp_edge_is_the_limit_of_smoothed_edges(case, automatic_nodes):
    # common practice, no source: a Gaussian smoothing of width w moves smooth results by
    # O(w²); the fit x + A w² + B w³ through w = 0.1, 0.05, 0.025 (on 4/w nodes, spectrally
    # resolved) extrapolates to the sharp edge. Measured: disc −4.46030, −4.03778, −3.91352 →
    # −3.86856 (with w = 0.0125 on 320 nodes as well, −3.86818: the fit's own uncertainty is
    # ≈ 10⁻⁴); annulus 7.03910, 7.07882, 7.08491 → 7.08621. The sharp edge on its automatic grid
    # (44 + 1.8λ nodes) agrees within 2·10⁻⁴.
    widths = np.array([0.1, 0.05, 0.025])
    smooth = [critical(case, mismatch_step_width=float(w), nodes=int(np.ceil(4.0 / w)))[0] for w in widths]
    fit = np.linalg.solve(np.stack([np.ones(3), widths**2, widths**3], axis=1), smooth)[0]
    nodes, _ = choose_grids(make_model("shallow_cap", FAST).settings, np.array([case["lam"]]),
                            np.zeros(1, dtype=bool), np.ones(1, dtype=bool), np.zeros(1), np.full(1, 2.0))
    assert nodes[0] == automatic_nodes
    sharp, _ = critical(case)
    assert sharp == pytest.approx(fit, rel=2e-4)
    # the sharp edge is outside the smoothed sequence, beyond its finest member
    assert abs(sharp - smooth[-1]) > abs(fit - smooth[-1]) * 0.9


@pytest.mark.parametrize("immovable", [True, False])
@pytest.mark.parametrize("annulus", [False, True])
def test_flat_plate_with_a_sharp_disc_is_the_lame_inclusion(immovable, annulus):
    # Lamé disc inclusion, re-derived (Timoshenko & Goodier 1951, thermal stresses in a thin
    # disc; see tests/models/shallow_cap/test_mismatch_reference.py): with the sharp edge on
    # the clustered grid the stresses hold at every node, the edge node included, where the
    # hoop stress is the mean of its one-sided values; λ = 0.01 (curvature coupling O(λ⁴))
    rho = 0.6
    one = np.ones(1, dtype=bool)
    pb = build_problem(np.array([0.01]), np.array([NU]), one, immovable * one, ~one, np.zeros(1),
                      np.full(1, 2.0), 48, mismatch=one, mismatch_strain=np.ones(1),
                      mismatch_radius=np.array([rho]), annulus=annulus * one, step_width=0.0, centre=rho)
    x = pb.grid.x
    on_edge = x == rho
    assert np.count_nonzero(on_edge) == 1
    n_r, n_t = linear_membrane_stress(pb)
    want_r, want_t = disc_inclusion_stress(x, rho, immovable)
    inside = disc_inclusion_stress(np.array([0.5 * rho]), rho, immovable)[1]
    want_t = np.where(on_edge, 0.5 * (want_t + inside), want_t)
    if annulus:
        whole = -1.0 / (1 - NU) if immovable else 0.0
        want_r, want_t = whole - want_r, whole - want_t
    np.testing.assert_allclose(n_r, want_r, atol=1e-7)
    np.testing.assert_allclose(n_t, want_t, atol=1e-7)


def test_sharp_edge_is_the_default_and_points_with_other_radii_get_their_own_grid():
    default = make_model("shallow_cap").settings
    assert default["mismatch_step_width"] == 0.0 and default["mismatch_grid"] == "split"
    settings = make_model("shallow_cap", FAST).settings
    eigen = np.array([True, True, True, False])
    radius = np.array([0.5, 0.3, 1.0, 0.5])
    np.testing.assert_array_equal(choose_grid_centres(settings, eigen, radius), [0.5, 0.3, 0.0, 0.0])
    smoothed = {**settings, "mismatch_step_width": 0.1}
    np.testing.assert_array_equal(choose_grid_centres(smoothed, eigen, radius), 0.0)
    lam = np.array([4.0, 8.0, 20.0, 30.0])
    nodes, beta = choose_grids(settings, lam, np.zeros(4, dtype=bool), np.ones(4, dtype=bool), np.zeros(4),
                               np.full(4, 2.0))
    np.testing.assert_array_equal(nodes, [52, 60, 80, 96])
    np.testing.assert_array_equal(beta, 0.0)
    old, _ = choose_grids(smoothed, lam, np.zeros(4, dtype=bool), np.ones(4, dtype=bool), np.zeros(4),
                          np.full(4, 2.0))
    np.testing.assert_array_equal(old, [34, 34, 46, 62])  # max(34, 16 + 1.5λ) and w·nodes ≥ 3.4
    # one batch with two radii solves each on its own grid: same answers as alone
    model = make_model("shallow_cap", FAST)
    both = model.solve_batch(cap_inputs([8.0, 8.0], load="mismatch", mismatch_strain=-6.0,
                                         mismatch_radius=np.array([0.5, 0.6])))
    alone = model.solve_batch(cap_inputs([8.0], load="mismatch", mismatch_strain=-6.0, mismatch_radius=0.6))
    assert both.outputs["critical_load"][1] == alone.outputs["critical_load"][0]
    assert both.outputs["critical_load"][0] == pytest.approx(-3.8687, abs=2e-4)
    with pytest.raises(ValueError, match="mismatch_step_width"):
        make_model("shallow_cap", {"mismatch_step_width": -0.1})
