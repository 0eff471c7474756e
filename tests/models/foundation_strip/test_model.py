"""foundation_strip: seam contract, numerics, fold criterion, statuses and convergence."""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell.models import TRUSTED_STATUSES, Status, get_model, make_model
from sweepshell.models.foundation_strip.continuation import StripPath
from sweepshell.models.foundation_strip.elastica import (
    build_strip_grid,
    build_strip_problem,
    compute_crest_contrast,
    compute_discrete_onset,
    compute_energy,
    compute_gradient,
    compute_hessian,
)
from sweepshell.models.foundation_strip.model import FoundationStripModel
from sweepshell.models.foundation_strip.path import FoldWatch, solve_strip
from tests.conftest import model_inputs

TWO_PI = 2.0 * np.pi


def test_registry_and_declarations():
    assert get_model("foundation_strip") is FoundationStripModel
    model = make_model("foundation_strip", {"length": 6.0})
    assert model.regimes == ("flat", "wrinkled", "folded", "flexure")
    names = [o.name for o in model.outputs]
    assert names == ["critical_load", "wavelength", "fold_confinement", "fold_amplitude", "flexural_parameter",
                     "zero_crossing_distance", "forebulge_distance", "forebulge_height", "max_deflection"]
    assert all(o.nullable and o.dtype == "float64" for o in model.outputs)
    assert model.settings["length"] == 6.0
    assert all(isinstance(v, (int, float, bool)) for v in model.settings.values())
    desc = model.describe()
    assert desc["name"] == "foundation_strip"


def test_contract_shapes_nan_and_batch_invariance():
    model = make_model("foundation_strip")
    cols = {
        "problem": ["compression", "flexure", "compression", "compression", "flexure", "compression"],
        "confinement": [0.0, 0.0, 0.01, 0.03, 0.0, 0.3],
        "axial_force": [0.0, 0.0, 0.0, 0.0, 1e20, 0.0],  # the second flexure point buckles
    }
    whole = model.solve_batch(model_inputs(model, **cols))
    assert whole.status.dtype == np.uint8 and whole.regime.dtype == np.int8
    assert list(whole.status) == [1, 1, 1, 1, Status.outside_validity, Status.outside_validity]
    assert list(whole.regime) == [0, 3, 1, 2, -1, -1]  # the flexure point: regime "flexure"
    trusted = np.isin(whole.status, list(TRUSTED_STATUSES))
    for name, v in whole.outputs.items():
        assert v.shape == (6,) and v.dtype == np.float64, name
        assert np.all(np.isnan(v[~trusted])), name
    # batch invariance and determinism: each point alone gives the same answer
    for i in range(6):
        alone = model.solve_batch(model_inputs(model, **{k: [v[i]] for k, v in cols.items()}))
        assert alone.status[0] == whole.status[i] and alone.regime[0] == whole.regime[i]
        for name, v in whole.outputs.items():
            np.testing.assert_array_equal(alone.outputs[name][0], v[i], err_msg=name)


def test_points_sharing_a_strip_share_its_fold():
    # B and K only rescale; a sweep over confinement reuses one path
    model = make_model("foundation_strip")
    res = model.solve_batch(model_inputs(model, bending_stiffness=[1.0, 16.0, 1.0],
                                         foundation_stiffness=[1.0, 1.0, 1.0], cubic_stiffness=[0.0, 0.0, 0.0],
                                         confinement=[0.005, 0.04, 0.04]))
    fold = res.outputs["fold_confinement"]
    assert fold[0] == fold[1] == fold[2]
    assert list(res.regime) == [1, 2, 2]
    assert np.isnan(res.outputs["fold_amplitude"][0]) and res.outputs["fold_amplitude"][1] == res.outputs[
        "fold_amplitude"][2]


def test_extensible_strip_is_flat_below_onset_and_can_skip_the_path():
    # onset confinement = P_c/A = 2√(BK)/A = 0.002 for B = K = 1, A = 1000
    fast = make_model("foundation_strip", {"follow_path_below_onset": False})
    res = fast.solve_batch(model_inputs(fast, stretching_stiffness=1000.0, confinement=[0.0, 0.0019, 0.0021]))
    assert list(res.regime[:2]) == [0, 0] and res.regime[2] in (1, 2)
    assert np.all(np.isnan(res.outputs["fold_confinement"][:2]))
    assert res.outputs["fold_confinement"][2] > 0.002
    full = make_model("foundation_strip")
    res2 = full.solve_batch(model_inputs(full, stretching_stiffness=1000.0, confinement=[0.0019]))
    assert res2.regime[0] == 0 and res2.outputs["fold_confinement"][0] == res.outputs["fold_confinement"][2]


def test_energy_derivatives_match_finite_differences(rng):
    grid = build_strip_grid(20.0, 40)
    problem = build_strip_problem(grid, imperfection=0.1, width=3.0, cubic=-0.3)
    phi = problem.phi0 + 0.3 * rng.standard_normal(grid.n)
    eps = 1e-6
    eye = np.eye(grid.n)
    fd_grad = np.array([(compute_energy(problem, phi + eps * e) - compute_energy(problem, phi - eps * e)) / (2 * eps)
                        for e in eye])
    np.testing.assert_allclose(compute_gradient(problem, phi), fd_grad, atol=1e-7)
    fd_hess = np.array([(compute_gradient(problem, phi + eps * e) - compute_gradient(problem, phi - eps * e))
                        / (2 * eps) for e in eye])
    H = compute_hessian(problem, phi)
    np.testing.assert_allclose(H, fd_hess, atol=1e-7)
    np.testing.assert_array_equal(H, H.T)


def test_onset_converges_at_second_order():
    # exact value 2 (Hetényi 1946); observed order from a fit of log error vs log N
    Ns = np.array([8, 12, 16, 24, 32])
    err = [abs(compute_discrete_onset(build_strip_grid(4 * TWO_PI, 4 * n))[0] - 2.0) for n in Ns]
    order = -np.polyfit(np.log(Ns), np.log(err), 1)[0]
    assert 1.9 < order < 2.1


@pytest.mark.slow
def test_fold_load_converges_at_second_order():
    # load on the fold branch at total end-shortening Δ = 3 against Diamant & Witten 2011,
    # P = 2 − Δ²/16 (the finite strip and the 1e-3 imperfection shift it by ~1e-3)
    L = 8 * TWO_PI
    Ns = np.array([16, 24, 32])
    err = []
    for n in Ns:
        out = solve_strip(length=L, segments=8 * n, imperfection=1e-3 * TWO_PI, width=TWO_PI, cubic=0.0,
                          compliance=0.0, onset_confinement=0.0, targets=np.array([3.2 / L]), fold_contrast=3.0,
                          search_limit=0.0, tol=1e-10, max_steps=300)
        p = np.interp(3.0, np.asarray(out.path.confinement) * L, out.path.load)
        err.append(abs(p - (2.0 - 9.0 / 16.0)))
    order = -np.polyfit(np.log(Ns), np.log(err), 1)[0]
    assert 1.6 < order < 2.6, (err, order)


def test_crest_contrast_on_synthetic_profiles():
    x = np.linspace(0, 8 * TWO_PI, 801)
    uniform = np.sin(x / 2) * 0.0 + np.sin(x)
    c, a = compute_crest_contrast(uniform)
    assert c == pytest.approx(1.0, abs=1e-3) and a == pytest.approx(1.0, abs=1e-3)
    fold = np.cos(x - 4 * np.pi * 2) / np.cosh((x - 8 * np.pi) / 3.0)
    c2, a2 = compute_crest_contrast(fold)
    assert c2 > 10.0 and a2 == pytest.approx(1.0, abs=1e-3)
    assert compute_crest_contrast(np.zeros(10))[0] == np.inf


def test_fold_watch_rules():
    path = StripPath()
    watch = FoldWatch(3.0)
    for c, p, C in [(0.0, 0.0, 4.0), (0.001, 1.9, 2.0), (0.002, 1.95, 2.5), (0.004, 1.9, 3.5)]:
        path.confinement.append(c)
        path.load.append(p)
        path.contrast.append(C)
        watch.update(path)
    assert watch.seen_wrinkle
    assert watch.fold == pytest.approx(0.002 + 0.5 * 0.002)
    # never below the threshold: the fold is at the contrast minimum
    path, watch = StripPath(), FoldWatch(3.0)
    for c, p, C in [(0.0, 0.0, 9.0), (0.001, 1.5, 8.0), (0.002, 1.6, 7.0), (0.004, 1.55, 9.0)]:
        path.confinement.append(c)
        path.load.append(p)
        path.contrast.append(C)
        watch.update(path)
    assert watch.fold == 0.002


def test_larger_imperfection_folds_earlier():
    model = make_model("foundation_strip")
    res = model.solve_batch(model_inputs(model, imperfection=[1e-4, 1e-3, 1e-2], confinement=0.02))
    fold = res.outputs["fold_confinement"]
    assert np.all(res.status == Status.ok)
    assert fold[0] > fold[1] > fold[2]


def test_contact_is_outside_validity():
    model = make_model("foundation_strip")
    res = model.solve_batch(model_inputs(model, confinement=[0.5, 0.03]))
    assert res.status[0] == Status.outside_validity and res.regime[0] == -1
    assert res.status[1] == Status.ok and res.regime[1] == 2
    assert np.all(np.isnan([v[0] for v in res.outputs.values()]))
