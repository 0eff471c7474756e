"""foundation_strip: the perfect strip (imperfection = 0) by branch switching."""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell.models import Status, make_model
from sweepshell.models.foundation_strip.elastica import (
    build_strip_grid,
    compute_crest_contrast,
    compute_discrete_onset,
    compute_node_heights,
    count_half_waves,
)
from sweepshell.models.foundation_strip.path import solve_strip
from tests.conftest import model_inputs

TWO_PI = 2.0 * np.pi


def follow_perfect(length, segments, target, search_limit=0.0):
    return solve_strip(length=length, segments=segments, imperfection=0.0, width=TWO_PI, cubic=0.0,
                       compliance=0.0, onset_confinement=0.0, targets=np.array([target]), fold_contrast=3.0,
                       search_limit=search_limit, tol=1e-9, max_steps=300)


def test_perfect_strip_wrinkles_at_the_finite_strip_onset():
    # Timoshenko & Gere 1961 (finite pinned beam on a Winkler foundation), REFERENCES.md [drv]:
    # η = 1000 → P_cr L²/(π² B) = 63.778 with m = 6 half-waves
    L = np.pi * 1000.0 ** 0.25
    grid = build_strip_grid(L, 240)
    out = follow_perfect(L, 240, 2e-4)
    path = out.path
    assert path.bifurcations[0] == 1 and path.load[0] == 0.0
    assert np.all(path.states[1][:240] == 0.0)  # flat up to the bifurcation
    p_bif = path.load[1]
    assert p_bif == pytest.approx(compute_discrete_onset(grid)[0], rel=1e-12)
    assert abs(p_bif * L ** 2 / np.pi ** 2 - 63.778) < 2e-3 * 63.778
    # the first state past it is the m = 6 wrinkle, uniform (contrast 1), load just below P_c
    y = compute_node_heights(path.states[2][:240], grid.h)
    assert count_half_waves(y) == 6
    assert compute_crest_contrast(y)[0] == pytest.approx(1.0, abs=1e-2)
    assert path.confinement[2] > 0.0 and 0.0 < p_bif - path.load[2] < 1e-2


def test_perfect_strip_fold_is_the_limit_of_imperfect_strips():
    # common practice, no source: imperfection → 0 must approach the perfect strip. At 7.5
    # wavelengths the critical mode has the parity of the centred imperfection (measured:
    # 0.02419, 0.02487 → 0.02502 at 16 segments per wavelength; the fold is interpolated
    # linearly in the contrast between path states, worth ~0.5 % at these step lengths)
    model = make_model("foundation_strip", {"length": 7.5})
    res = model.solve_batch(model_inputs(model, imperfection=[1e-3, 1e-4, 0.0], confinement=0.03))
    assert np.all(res.status == Status.ok) and list(res.regime) == [2, 2, 2]
    f3, f4, f0 = res.outputs["fold_confinement"]
    assert abs(f4 - f0) < 0.2 * abs(f3 - f0)
    assert abs(f4 - f0) < 1e-2 * f0
    assert 0.02 < f0 < 0.03


def test_perfect_strip_regimes_and_batch_invariance():
    model = make_model("foundation_strip")
    cols = {"imperfection": [0.0, 0.0, 0.0, 1e-3], "confinement": [0.0, 0.01, 0.03, 0.03]}
    whole = model.solve_batch(model_inputs(model, **cols))
    assert np.all(whole.status == Status.ok)
    assert list(whole.regime) == [0, 1, 2, 2]
    fold = whole.outputs["fold_confinement"]
    assert fold[0] == fold[1] == fold[2]
    assert 0.01 < fold[0] < 0.03 and fold[0] != fold[3]
    assert np.isnan(whole.outputs["fold_amplitude"][1]) and whole.outputs["fold_amplitude"][2] > 0.0
    for i in range(4):
        alone = model.solve_batch(model_inputs(model, **{k: [v[i]] for k, v in cols.items()}))
        assert alone.status[0] == whole.status[i] and alone.regime[0] == whole.regime[i]
        for name, v in whole.outputs.items():
            np.testing.assert_array_equal(alone.outputs[name][0], v[i], err_msg=name)


def test_zero_imperfection_is_allowed():
    spec = make_model("foundation_strip").get_parameter("imperfection")
    spec.check_values([0.0, 0.1], where="fixed.imperfection")
    assert spec.describe_allowed() == "[0, 0.1]"


@pytest.mark.slow
def test_switched_branch_follows_diamant_witten_law():
    # Diamant & Witten 2011, PRL 107:164302: P = 2 − Δ²/16 (units B = K = 1) on the
    # localised branch; the same 0.01 tolerance as for imperfect strips at 32 segments per
    # wavelength (the discrete load is low by about h²/4 ≈ 0.01 here)
    L = 7.5 * TWO_PI
    out = follow_perfect(L, 240, 3.1 / L)
    path = out.path
    start = path.bifurcations[-1]
    assert len(path.bifurcations) == 2  # flat → wrinkle → localising branch
    delta = np.asarray(path.confinement[start:]) * L
    load = np.asarray(path.load[start:])
    assert np.all(np.diff(delta) > 0.0) and delta[-1] >= 3.0
    for d in (2.0, 2.5, 3.0):
        p = np.interp(d, delta, load)
        assert abs(p - (2.0 - d ** 2 / 16.0)) < 0.01, (d, p)
    y = compute_node_heights(path.states[-1][:240], L / 240)
    assert np.max(np.abs(y - y[::-1])) < 1e-6 * np.max(np.abs(y))  # folded at mid-length, symmetric
