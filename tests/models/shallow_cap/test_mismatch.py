"""The ``shallow_cap`` mismatch-strain load: convergence, smoothing width, cap behaviour.

e = ε*/ε_cl (ε_cl = 2h/(R c)), negative = shrinkage; λ the shell parameter. Reference checks in
the flat-plate limit live in tests/models/shallow_cap/test_mismatch_reference.py.
"""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell.models import Status, make_model
from tests.conftest import cap_inputs

FAST = {"check_bistability": False, "asymmetric_modes": 10, "path_samples": 16}


def test_critical_mismatch_converges_spectrally_with_resolution():
    # common practice, no source: observed order from np.polyfit of log error vs log nodes, for a
    # shrinking central disc (ρ = 0.5) that wrinkles around its edge (n = 6) at λ = 8; w = 0.15 a so
    # that grids from 23 nodes up are used as given (w·nodes ≥ 3.4); at w = 0.1 a: −4.4603
    inputs = cap_inputs([8.0], load="mismatch", mismatch_strain=-6.0)
    wide = {**FAST, "mismatch_step_width": 0.15}
    ref = make_model("shallow_cap", {**wide, "nodes": 56}).solve_batch(inputs).outputs["critical_load"][0]
    nodes = np.array([23, 25, 27, 29])
    err = []
    for m in nodes:
        got = make_model("shallow_cap", {**wide, "nodes": int(m)}).solve_batch(inputs)
        assert got.outputs["critical_wavenumber"][0] == 6
        err.append(abs(got.outputs["critical_load"][0] / ref - 1))
    order = -np.polyfit(np.log(nodes), np.log(err), 1)[0]
    assert order > 8.0  # spectral for a fixed smoothing width (observed ≈ 17)
    assert err[-1] < 1e-5
    assert ref == pytest.approx(-5.0863, rel=1e-4)


def test_sharp_edge_limit_is_second_order_in_the_smoothing_width():
    # common practice, no source: a symmetric (Gaussian) smoothing of the step changes smooth
    # responses by O(w²); observed order of the initial apex deflection rate over w = 0.2 … 0.025
    # (nodes scaled with 1/w so that every width is resolved)
    widths = np.array([0.2, 0.1, 0.05, 0.025])
    rate = []
    for w in widths:
        model = make_model("shallow_cap", {"asymmetric_modes": 0, "check_bistability": False, "path_samples": 4,
                                           "mismatch_step_width": float(w), "nodes": int(np.ceil(4.0 / w))})
        res = model.solve_batch(cap_inputs([8.0], load="mismatch", mismatch_strain=-0.01))
        rate.append(res.outputs["stiffness"][0])
    diffs = np.abs(np.diff(rate))
    order = np.polyfit(np.log(widths[1:]), np.log(diffs), 1)[0]
    assert order == pytest.approx(2.0, abs=0.15)
    # the default w = 0.1 a moves the rate by 1.4 % from its sharp-edge (Richardson) value
    sharp = rate[-1] + (rate[-1] - rate[-2]) / 3.0
    assert rate[1] == pytest.approx(sharp, rel=0.02)


def test_shrinking_disc_pulls_the_apex_in_and_wrinkles_around_it_on_deep_caps():
    # this model's result, no source: a shrinking central disc (ρ = 0.5, clamped, immovable) is in
    # tension and pulls the apex in; the hoop-compressed ring around it wrinkles (cos nθ) on caps
    # deeper than λ ≈ 7, with more waves on deeper caps; shallower caps stay stable to e = −8.
    # Sharp edge (the default): −3.869 (λ = 8) and −4.476 (λ = 12); with w = 0.1 a both were below −4
    model = make_model("shallow_cap", {**FAST, "asymmetric_modes": 16})
    res = model.solve_batch(cap_inputs([4.0, 6.0, 8.0, 12.0], load="mismatch", mismatch_strain=-8.0))
    assert list(res.status) == [Status.no_instability, Status.no_instability, Status.ok, Status.ok]
    assert list(res.regime) == [0, 0, 2, 2]
    assert np.all(res.outputs["stiffness"] < 0)  # δ positive inwards, e < 0
    n8, n12 = res.outputs["critical_wavenumber"][2:]
    assert 5 <= n8 < n12
    assert np.all((res.outputs["critical_load"][2:] > -6.0) & (res.outputs["critical_load"][2:] < -3.5))
    assert np.all(res.outputs["critical_deflection"][2:] > 0)


def test_swelling_whole_plate_bulges_through_the_plate_buckling_load_without_a_critical_point():
    # Timoshenko & Gere 1961 (clamped plate, N_cr = 14.68 D/a², i.e. e_cr λ² = 14.68(1−ν)/4): a nearly
    # flat cap (λ = 0.3) is an imperfect plate, so its swelling path has no critical point but a knee
    # at e_cr: |δ|/h < 0.05 at half of it and > 0.5 at 1.5 e_cr (thresholds ours, no source). The
    # apex rises (δ < 0): swelling pushes a convex cap out
    lam = 0.3
    e_cr = 3.8317**2 * 0.7 / (4 * lam**2)
    res = make_model("shallow_cap", {**FAST, "asymmetric_modes": 4, "path_samples": 128}).solve_batch(
        cap_inputs([lam], load="mismatch", mismatch_strain=2 * e_cr, mismatch_radius=1.0))
    assert res.status[0] == Status.no_instability
    load, deflection = res.outputs["load_path"][0].T
    assert abs(np.interp(0.5 * e_cr, load, deflection)) < 0.05
    assert np.interp(1.5 * e_cr, load, deflection) < -0.5


def test_mismatch_knockdown_compares_with_the_cap_without_dimple():
    model = make_model("shallow_cap", FAST)
    res = model.solve_batch(cap_inputs([8.0, 8.0], load="mismatch", dimple_amplitude=np.array([0.0, 0.5])))
    crit = res.outputs["critical_load"]
    assert np.all(np.isfinite(crit))
    np.testing.assert_allclose(res.outputs["knockdown"], [1.0, crit[1] / crit[0]], rtol=1e-8)


def test_mismatch_strain_in_si_needs_thickness_and_sphere_radius():
    model = make_model("shallow_cap", FAST)
    inputs = cap_inputs([8.0, 8.0], load="mismatch", thickness=np.array([np.nan, 1e-3]),
                         sphere_radius=np.array([np.nan, 0.1]))
    res = model.solve_batch(inputs)
    c = np.sqrt(3 * (1 - 0.3**2))
    got = res.outputs["critical_mismatch_strain"]
    assert np.isnan(got[0])
    assert got[1] == pytest.approx(res.outputs["critical_load"][1] * 2e-3 / (0.1 * c), rel=1e-12)
    assert np.isnan(res.outputs["critical_pressure_si"]).all()


def test_mismatch_points_get_a_grid_that_resolves_the_smoothing_width():
    # w·nodes ≥ 3.4: a coarse nodes setting is raised for smoothed-edge mismatch points only
    inputs = cap_inputs([8.0], load="mismatch", mismatch_strain=-6.0)
    smoothed = {**FAST, "mismatch_step_width": 0.1}
    coarse = make_model("shallow_cap", {**smoothed, "nodes": 16}).solve_batch(inputs)
    default = make_model("shallow_cap", smoothed).solve_batch(inputs)
    np.testing.assert_array_equal(coarse.outputs["critical_load"], default.outputs["critical_load"])
