"""Asymmetric (``cos nθ``) stability scan of apex-force caps on the refined stability grid."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import optimize

from sweepshell.models import make_model
from sweepshell.models.shallow_cap.compiled import trace_cap_paths
from sweepshell.models.shallow_cap.modes import (
    _reduced_matrices,
    compute_mode_coefficients,
    compute_mode_determinants,
    count_unstable_modes,
)
from sweepshell.models.shallow_cap.problem import build_problem
from sweepshell.models.shallow_cap.stability_grid import APEX_STABILITY_REFINEMENT, select_stability_nodes
from tests.conftest import cap_inputs
from tests.models.shallow_cap.test_model import make_initial_tangent

NU = 0.3
C = np.sqrt(3.0 * (1.0 - NU**2))
MODES = np.arange(1, 31)


def trace_apex_paths(lam, clamped, immovable, nodes, max_deflection):  # type: ignore[no-untyped-def]
    """Return the problem and the traced apex-force paths ``(z, count)`` up to ``max_deflection`` (over h)."""
    n = lam.size
    pb = build_problem(lam, np.full(n, NU), clamped, immovable, np.ones(n, bool), np.zeros(n), np.full(n, 2.0), nodes)
    w, z0, t0 = make_initial_tangent(pb)
    zh, _, _, count, *_ = trace_cap_paths(
        pb, z0, t0, w, first_step=0.1, max_step=0.25, min_step=1e-7, max_points=400, max_turn_deg=12.0, tol=1e-10,
        max_iter=8, mu_max=np.full(n, np.inf), defl_max=np.asarray(max_deflection, float), check_bistability=False,
        max_suction=2.0)
    return pb, zh, count


def lowest_eigenvalues(pb, z, idx, modes, nodes):  # type: ignore[no-untyped-def]
    """Return the lowest real part of the eigenvalues of each ``cos nθ`` operator on a ``nodes`` grid."""
    from sweepshell.numerics.radial_chebyshev import build_radial_grid

    co = compute_mode_coefficients(pb, z, idx, nodes)
    x = build_radial_grid(nodes).x
    out = np.empty((z.shape[0], len(modes)))
    for j, n, a in _reduced_matrices(pb, co, modes):
        inner = a[:, 2:, 2:] - a[:, 2:, :2] @ np.linalg.solve(a[:, :2, :2], a[:, :2, 2:])
        mass = x[2:] ** ((1 if n == 1 else 2) + 2)
        out[:, j] = np.linalg.eigvals(inner / mass[None, :, None]).real.min(axis=1)
    return out


def test_apex_states_use_the_refined_grid_and_pressure_states_their_own():
    pb = build_problem(np.array([8.0, 8.0]), np.full(2, NU), np.ones(2, bool), np.ones(2, bool),
                      np.array([False, True]), np.zeros(2), np.full(2, 2.0), 24)
    np.testing.assert_array_equal(select_stability_nodes(pb, np.arange(2)), [24, APEX_STABILITY_REFINEMENT * 24])


def test_refined_grid_reproduces_the_state_grid_for_smooth_pressure_states():
    # common practice, no source: for a smooth (pressure) state the interpolant is exact to rounding, so the
    # operator on a 3x grid must have the state grid's low eigenvalues
    lam = np.array([9.0])
    pb = build_problem(lam, np.full(1, NU), np.ones(1, bool), np.ones(1, bool), np.zeros(1, bool), np.zeros(1),
                      np.full(1, 2.0), 24)
    m = pb.size
    z = np.zeros((1, 2 * m + 1))
    x = pb.grid.x
    z[0, :m] = 0.3 * x**3 - 0.2 * x
    z[0, m:2 * m] = 0.8 * x + 0.1 * x**3
    z[0, -1] = 0.5
    modes = np.array([1, 2, 3, 6, 10])
    coarse = lowest_eigenvalues(pb, z, np.zeros(1, int), modes, m)
    fine = lowest_eigenvalues(pb, z, np.zeros(1, int), modes, 3 * m)
    np.testing.assert_allclose(fine, coarse, rtol=1e-6)


def test_state_grid_gives_spurious_modes_that_the_refined_grid_removes():
    # λ = 10, clamped immovable, apex deflection ≈ h. On the state's own grid the log-singular apex curvature
    # gives n = 3 an eigenvalue that falls with the node count (measured: −22 λ⁴ at 24 nodes, −75 λ⁴ at 34);
    # on 3x and 4x grids the interpolated state's eigenvalues agree and are positive; common practice, no source
    pb, zh, count = trace_apex_paths(np.array([10.0]), np.ones(1, bool), np.ones(1, bool), 24, [1.0])
    z = zh[0, count[0] - 1:count[0]]
    idx = np.zeros(1, int)
    modes = np.array([2, 3, 4])
    own = lowest_eigenvalues(pb, z, idx, modes, 24)[0] / 10.0**4
    three = lowest_eigenvalues(pb, z, idx, modes, 72)[0] / 10.0**4
    four = lowest_eigenvalues(pb, z, idx, modes, 96)[0] / 10.0**4
    assert own[1] < -10.0
    assert np.all(three > 1.0)
    np.testing.assert_allclose(three, four, rtol=3e-3)


def test_asymmetric_stiffness_rises_under_a_small_apex_force():
    # common practice, no source: d(lowest eigenvalue)/dP at P → 0, λ = 10 clamped immovable, over λ⁴.
    # On the refined grid it is positive and converged (n = 2, 3, 4: +0.0822, +0.0590, +0.0449 at 24
    # and 34 nodes); on the state's own grid it is negative and grows with the nodes (n = 2: −70, −109)
    slopes = {}
    for nodes in (24, 34):
        pb = build_problem(np.array([10.0]), np.full(1, NU), np.ones(1, bool), np.ones(1, bool), np.ones(1, bool),
                          np.zeros(1), np.full(1, 2.0), nodes)
        _, z0, t0 = make_initial_tangent(pb)
        z1 = 1e-4 * t0 / (t0[0, -1] * pb.force_scale[0])  # the state at P = 1e-4, to first order
        modes = np.array([2, 3, 4])
        for grid in (nodes, 3 * nodes):
            low = lowest_eigenvalues(pb, np.concatenate([z0, z1]), np.zeros(2, int), modes, grid)
            slopes[nodes, grid] = (low[1] - low[0]) / 1e-4 / 10.0**4
    np.testing.assert_allclose(slopes[24, 72], [0.0822, 0.0590, 0.0449], rtol=5e-3)
    np.testing.assert_allclose(slopes[34, 102], slopes[24, 72], rtol=5e-3)
    assert slopes[34, 34][0] < slopes[24, 24][0] < -50.0


@pytest.mark.parametrize("nodes", [24, pytest.param(34, marks=pytest.mark.slow)])
def test_no_asymmetric_instability_at_small_indentation(nodes):
    # common practice, no source, and qualitatively Vaziri & Mahadevan 2008 (PNAS 105:7913) and Pauchard &
    # Rica 1998 (Phil. Mag. B 78:225), value from memory: an indented spherical shell stays axisymmetric
    # until the inverted dimple is well formed, many thicknesses deep. Up to δ = 2h, λ = 5, 10, 20, both
    # bending edges: no determinant of n = 1…30 changes sign and no operator has a negative eigenvalue
    lam = np.repeat([5.0, 10.0, 20.0], 2)
    clamped = np.tile([True, False], 3)
    pb, zh, count = trace_apex_paths(lam, clamped, np.ones(6, bool), nodes, np.full(6, 2.0))
    rows = np.concatenate([np.full(c, i) for i, c in enumerate(count)])
    steps = np.concatenate([np.arange(c) for c in count])
    sign, _ = compute_mode_determinants(pb, zh[rows, steps], rows, MODES)
    reference = sign[steps == 0][rows]
    assert np.all(pb.apex_deflection(zh[rows, steps], rows)[count.cumsum() - 1] >= 2.0)
    np.testing.assert_array_equal(sign, reference)
    last = count - 1
    assert count_unstable_modes(pb, zh[np.arange(6), last], np.arange(6), MODES).sum() == 0


def test_deep_caps_buckle_asymmetrically_at_an_indentation_of_many_thicknesses():
    # qualitative, Vaziri & Mahadevan 2008 (PNAS 105:7913), value from memory: deep indented shells buckle
    # into polygonal (n ≥ 2) shapes once the axisymmetric dimple is deep; shallow caps do not. Measured here
    # (automatic grids, clamped immovable): λ = 5 no bifurcation before the path ends; λ = 10 n = 4 at
    # δ = 18.72 h, P = 9.4474; λ = 20 n = 3 at δ = 15.34 h, P = 6.297; both before the force maximum (11.55,
    # 34.3). The same with 2° and 1.5° turn limits; version 1.8 (stability sampled at every third path point)
    # missed the n = 4 window at λ = 10 and reported n = 5 at 9.763
    model = make_model("shallow_cap", {"check_bistability": False, "path_samples": 8})
    res = model.solve_batch(cap_inputs([5.0, 10.0, 20.0], load="apex_force"))
    out = res.outputs
    assert res.regime[0] != 2
    np.testing.assert_array_equal(res.regime[1:], [2, 2])
    np.testing.assert_array_equal(out["critical_wavenumber"][1:], [4.0, 3.0])
    assert np.all(out["critical_deflection"][1:] > 5.0)
    np.testing.assert_allclose(out["critical_load"][1:], [9.4474, 6.2973], rtol=1e-4)
    np.testing.assert_allclose(out["critical_deflection"][1:], [18.718, 15.343], rtol=1e-4)


def fit_order(nodes: np.ndarray, values: np.ndarray) -> float:
    """Return p of ``v(M) = v∞ + K M^-p`` through three values (successive differences)."""
    ratio = (values[0] - values[1]) / (values[1] - values[2])

    def mismatch(p: float) -> float:
        a, b, c = nodes.astype(float) ** -p
        return (a - b) / (b - c) - ratio

    return float(optimize.brentq(mismatch, 0.05, 20.0))


@pytest.mark.slow
def test_apex_bifurcation_force_converges_with_nodes():
    # common practice, no source: observed order of the critical force from successive differences.
    # On the grid stretched towards the apex (apex_grid_stretch 0.85). Sliding edge, λ = 12: n = 3 at
    # P = 6.223535, 6.224301, 6.224304 (24, 34, 48 nodes; 6.224304 at 64): order > 3. Immovable edge, λ = 10:
    # n = 4 at P = 9.44607, 9.44741, 9.44736, 9.44722 (24, 34, 48, 64 nodes; 9.44687 at 72), not monotone, so
    # no order is fitted; its n = 4 window (the determinant flips back near P = 10.5, after n = 5 at 9.76)
    # is the same on 34 and 64 nodes. On plain Chebyshev nodes the immovable case converged at about first order
    nodes = np.array([24, 34, 48, 64])
    loads, waves = [], []
    for m in nodes:
        model = make_model("shallow_cap", {"nodes": int(m), "check_bistability": False, "path_samples": 8})
        res = model.solve_batch(cap_inputs([12.0, 10.0], load="apex_force",
                                            edge_inplane=np.array(["sliding", "immovable"])))
        loads.append(res.outputs["critical_load"])
        waves.append(res.outputs["critical_wavenumber"])
    loads_arr = np.array(loads)
    np.testing.assert_array_equal(np.array(waves), [[3.0, 4.0]] * 4)
    assert fit_order(nodes[:3], loads_arr[:3, 0]) > 3.0
    assert abs(loads_arr[2, 0] - loads_arr[1, 0]) < 2e-4 * loads_arr[2, 0]
    assert np.ptp(loads_arr[1:, 1]) < 3e-5 * loads_arr[2, 1]


def test_deep_cap_bifurcation_is_local_to_the_indenter():
    # common practice, no source: once the cap is much wider than the bending length a/λ the dimple and its
    # buckling are local, so in units of E h³/R and h they hardly depend on λ. Sliding clamped caps, 34
    # nodes: n = 3 at P = 6.2252, 6.2517, 6.2390 and δ = 15.28 h, 15.25 h, 15.26 h for λ = 12, 15, 20
    model = make_model("shallow_cap", {"check_bistability": False, "path_samples": 8})
    res = model.solve_batch(cap_inputs([12.0, 15.0, 20.0], load="apex_force", edge_inplane="sliding"))
    out = res.outputs
    np.testing.assert_array_equal(out["critical_wavenumber"], [3.0, 3.0, 3.0])
    np.testing.assert_allclose(out["critical_load"], 6.24, rtol=5e-3)
    np.testing.assert_allclose(out["critical_deflection"], 15.26, rtol=5e-3)


def test_scanning_in_rounds_finds_the_same_first_flip(monkeypatch):
    # common practice, no source: evaluating the path samples in rounds and stopping each cap at its first
    # flip gives the same critical states as evaluating every sample at once
    from sweepshell.models.shallow_cap import scan

    model = make_model("shallow_cap", {"check_bistability": False, "path_samples": 8})
    inputs = cap_inputs([10.0, 20.0, 8.0], load=np.array(["apex_force", "apex_force", "pressure"]))
    monkeypatch.setattr(scan, "_SCAN_ROUND", 2)  # several rounds before every flip here
    rounds = model.solve_batch(inputs).outputs
    monkeypatch.setattr(scan, "_SCAN_ROUND", 10**6)
    at_once = model.solve_batch(inputs).outputs
    np.testing.assert_array_equal(rounds["critical_wavenumber"], at_once["critical_wavenumber"])
    np.testing.assert_array_equal(rounds["critical_load"], at_once["critical_load"])
    assert np.all(rounds["critical_wavenumber"][:2] > 0)


def test_screened_scan_finds_the_critical_states_of_the_full_scan(monkeypatch):
    # common practice, no source: the screened scan (screening grid everywhere, the stability grid where a
    # screening sign changes) and the scan that evaluates the stability grid at every path step agree:
    # pinned λ = 8 (n = 1), clamped λ = 10 (the n = 4 window of about one step) and sliding λ = 20 (n = 3)
    from sweepshell.models.shallow_cap import scan

    model = make_model("shallow_cap", {"check_bistability": False, "path_samples": 8})
    inputs = cap_inputs([8.0, 10.0, 20.0], load="apex_force", edge=np.array(["pinned", "clamped", "clamped"]),
                        edge_inplane=np.array(["immovable", "immovable", "sliding"]))
    screened = model.solve_batch(inputs).outputs
    monkeypatch.setattr(scan, "SCREEN_APEX", False)
    full = model.solve_batch(inputs).outputs
    np.testing.assert_array_equal(screened["critical_wavenumber"], [1.0, 4.0, 3.0])
    np.testing.assert_array_equal(screened["critical_wavenumber"], full["critical_wavenumber"])
    np.testing.assert_allclose(screened["critical_load"], full["critical_load"], rtol=1e-9)


def test_a_screen_with_spurious_modes_still_gives_the_stability_grid_answer(monkeypatch):
    # common practice, no source: the screen only says where to look. On the state's own grid without the
    # filter (spurious n = 2, 3 sign changes at the first loaded step) the screened scan watches those wave
    # numbers on the stability grid and still finds n = 4 at P = 9.4474 for the clamped λ = 10 cap
    from sweepshell.models.shallow_cap import stability_grid

    monkeypatch.setattr(stability_grid, "APEX_SCREEN_REFINEMENT", 1.0)
    monkeypatch.setattr(stability_grid, "APEX_SCREEN_FILTER", (0.0, 8.0))
    stability_grid.build_refinement.cache_clear()
    try:
        model = make_model("shallow_cap", {"check_bistability": False, "path_samples": 8})
        out = model.solve_batch(cap_inputs([10.0], load="apex_force")).outputs
    finally:
        stability_grid.build_refinement.cache_clear()
    np.testing.assert_array_equal(out["critical_wavenumber"], [4.0])
    np.testing.assert_allclose(out["critical_load"], [9.4474], rtol=1e-4)


@pytest.mark.parametrize("nodes", [24, 36])
def test_unloaded_caps_have_the_flat_plates_determinant_signs(nodes):
    # common practice, no source: a stress-free shallow cap is stable whatever its rise or dimple (bending and
    # stretching energies are both positive), so its determinants keep the flat plate's signs. The screened scan
    # takes its reference signs from the flat plate; here they are compared with the assembled ones over rises
    # λ 0.5 … 40, dimples of both signs, both bending and in-plane edges and four Poisson's ratios
    from sweepshell.models.shallow_cap.screened_scan import compute_unloaded_signs

    rng = np.random.default_rng(nodes)
    n = 16
    dimpled = np.arange(n) % 2 == 1
    pb = build_problem(rng.uniform(0.5, 40.0, n), rng.choice([0.0, 0.25, 0.3, 0.45], n), rng.random(n) < 0.5,
                       rng.random(n) < 0.5, np.ones(n, bool), np.where(dimpled, rng.uniform(-1.0, 2.0, n), 0.0),
                       rng.uniform(0.3, 6.0, n), nodes)
    idx = np.arange(n)
    assembled, logdet = compute_mode_determinants(pb, np.zeros((n, 2 * pb.size + 1)), idx, MODES)
    np.testing.assert_array_equal(compute_unloaded_signs(pb, idx, MODES), assembled)
    assert np.all(np.ptp(logdet, axis=0) > 5.0)  # the caps' matrices are far from one another's


def test_a_flip_the_screen_shows_too_late_is_found_at_the_end_of_the_range(monkeypatch):
    # common practice, no source: a screen on half the state's nodes lags the stability grid. For this clamped
    # sliding cap (λ = 10.2201, ν = 0.4) n = 2 flips just before the force maximum (P = 6.20354 against 6.20715)
    # and that screen has not changed by the end of the scanned range; the check of the range's last step on
    # the stability grid finds the flip, as the unscreened scan does (without it the fold was reported)
    from sweepshell.models.shallow_cap import scan, stability_grid

    model = make_model("shallow_cap", {"check_bistability": False, "path_samples": 8})
    inputs = cap_inputs([10.2201], load="apex_force", edge_inplane="sliding")
    inputs["poisson_ratio"] = np.array([0.4])
    monkeypatch.setattr(stability_grid, "APEX_SCREEN_REFINEMENT", 0.5)
    lagging = model.solve_batch(inputs).outputs
    monkeypatch.setattr(scan, "SCREEN_APEX", False)
    full = model.solve_batch(inputs).outputs
    np.testing.assert_array_equal(lagging["critical_wavenumber"], [2.0])
    np.testing.assert_array_equal(full["critical_wavenumber"], [2.0])
    np.testing.assert_allclose(lagging["critical_load"], full["critical_load"], rtol=1e-9)
    np.testing.assert_allclose(full["critical_load"], [6.20354], rtol=1e-5)
